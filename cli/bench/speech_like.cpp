// speech_like.cpp — the syllable generator (two-pole formant resonators) and its WAV writer.
#include "cli/bench/speech_like.h"

#include <sndfile.h>

#include <algorithm>
#include <cmath>
#include <numbers>
#include <string>

#include "audio/error.h"

namespace tessera::bench {

// Vowel formants F1–F3 in Hz, rounded textbook values (from memory; only their spread matters).
static const double kFormants[][3] = {{730, 1090, 2440}, {270, 2290, 3010}, {530, 1840, 2480},
                                      {570, 840, 2410},  {300, 870, 2240},  {660, 1720, 2410}};

SpeechLike::SpeechLike(int sample_rate, unsigned seed) : sr_(sample_rate), rng_(seed) {}

void SpeechLike::fill(float* out, std::size_t n) {
  const std::size_t syl = std::size_t(sr_ / 4);
  const double pi = std::numbers::pi;
  for (std::size_t k = 0; k < n; ++k, ++i_) {
    if (i_ % syl == 0) {
      vowel_ = next_;
      next_ = int(u_(rng_) * 6);
      fricative_ = u_(rng_) < 0.3;
      pause_ = u_(rng_) < 0.1;
    }
    const double pos = double(i_ % syl) / double(syl), t = double(i_) / sr_;
    const double env = pause_ ? 0.0 : std::sin(pi * pos);
    const double f0 = 120.0 + 30.0 * std::sin(2.0 * pi * 0.7 * t) + 15.0 * pos;
    phase_ += f0 / sr_;
    double src = 0.0;
    if (phase_ >= 1.0) {
      phase_ -= 1.0;
      src = 1.0;  // glottal pulse
    }
    double v = 0.0;
    for (int j = 0; j < 3; ++j) {  // two-pole resonators, formants gliding to the next vowel
      const double f = kFormants[vowel_][j] + pos * (kFormants[next_][j] - kFormants[vowel_][j]);
      const double bw = 60.0 + 40.0 * j, r = std::exp(-pi * bw / sr_);
      const double y = src + 2.0 * r * std::cos(2.0 * pi * f / sr_) * y1_[j] - r * r * y2_[j];
      y2_[j] = y1_[j];
      y1_[j] = y;
      v += y / (j + 1);
    }
    double s = 0.02 * v * env;
    if (fricative_ && pos > 0.75) s += 0.05 * g_(rng_) * std::sin(pi * (pos - 0.75) * 4.0);
    out[k] = float(s + 1e-4 * g_(rng_));
  }
}

std::vector<float> speech_like(int sample_rate, double seconds, unsigned seed) {
  std::vector<float> x(std::size_t(sample_rate * seconds));
  SpeechLike(sample_rate, seed).fill(x.data(), x.size());
  float peak = 0.0f;
  for (float v : x) peak = std::max(peak, std::abs(v));
  if (peak > 0)
    for (float& v : x) v *= 0.5f / peak;
  return x;
}

void write_speech_like_wav(const std::string& path, int sample_rate, double seconds, unsigned seed) {
  float gain = 1.0f;
  {
    SpeechLike probe(sample_rate, seed);
    std::vector<float> raw(std::size_t(sample_rate * std::min(seconds, 10.0)));
    probe.fill(raw.data(), raw.size());
    float peak = 0.0f;
    for (float v : raw) peak = std::max(peak, std::abs(v));
    if (peak > 0) gain = 0.5f / peak;
  }
  SF_INFO info{};
  info.samplerate = sample_rate;
  info.channels = 1;
  info.format = SF_FORMAT_WAV | SF_FORMAT_PCM_16;
  SNDFILE* f = sf_open(path.c_str(), SFM_WRITE, &info);
  if (!f) throw Error("cannot write '" + path + "': " + sf_strerror(nullptr));
  sf_command(f, SFC_SET_CLIPPING, nullptr, SF_TRUE);
  SpeechLike gen(sample_rate, seed);
  std::vector<float> buf(static_cast<std::size_t>(sample_rate));
  const std::size_t total = std::size_t(sample_rate * seconds);
  for (std::size_t done = 0; done < total;) {
    const std::size_t n = std::min(buf.size(), total - done);
    gen.fill(buf.data(), n);
    for (std::size_t i = 0; i < n; ++i) buf[i] *= gain;
    if (sf_writef_float(f, buf.data(), sf_count_t(n)) != sf_count_t(n)) {
      sf_close(f);
      throw Error("cannot write '" + path + "': disk full?");
    }
    done += n;
  }
  if (sf_close(f) != 0) throw Error("cannot finish '" + path + "'");
}

}  // namespace tessera::bench
