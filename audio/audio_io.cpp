// audio_io.cpp — libsndfile reading/writing, downmix, peak limiting.
#include "audio/audio_io.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <memory>
#include <sstream>
#include <unistd.h>

#include <sndfile.h>

#include "audio/atomic_file.h"
#include "audio/audio_stream.h"
#include "audio/error.h"

namespace tessera::audio {
namespace {

struct SndfileCloser {
  void operator()(SNDFILE* f) const { sf_close(f); }
};
using SndfileHandle = std::unique_ptr<SNDFILE, SndfileCloser>;

}  // namespace

// Both read through AudioStream, so whole-file and streamed samples agree bit for bit.
static Audio read_all(AudioStream& in, SourceInfo* info) {
  if (info) *info = in.source();
  Audio out;
  out.sample_rate = in.sample_rate();
  out.samples.resize(std::size_t(in.length()));
  std::size_t n = 0;
  while (n < out.samples.size()) {
    const std::size_t got = in.read(out.samples.data() + n, out.samples.size() - n);
    if (got == 0) break;
    n += got;
  }
  float probe;
  if (n == out.samples.size()) in.read(&probe, 1);  // reaches the end: the truncation checks run
  out.samples.resize(n);
  return out;
}

Audio load_audio(const std::string& path, SourceInfo* info) {
  AudioStream in(path);
  return read_all(in, info);
}

Audio load_audio_as(const std::string& path, int sample_rate, const double* normalize_dbfs,
                    SourceInfo* info) {
  AudioStream in(path, sample_rate, normalize_dbfs);
  return read_all(in, info);
}

void normalize_peak(std::vector<float>& samples, double dbfs) {
  float peak = 0;
  for (float s : samples) peak = std::max(peak, std::fabs(s));
  if (peak <= 0) return;
  const float gain = float(std::pow(10.0, dbfs / 20.0) / peak);
  for (float& s : samples) s *= gain;
}

SaveReport save_wav(const std::string& path, const std::vector<float>& samples, int sample_rate,
                    SampleFormat format, double peak_dbfs) {
  if (sample_rate <= 0) throw Error("cannot write '" + path + "': sample rate must be positive");
  SaveReport rep;
  for (float s : samples) {
    if (!std::isfinite(s)) throw Error("cannot write '" + path + "': the signal holds NaN or Inf");
    const float a = std::fabs(s);
    rep.input_peak = std::max(rep.input_peak, a);
    if (a > 1.0f) ++rep.clipped;
  }
  const double limit = std::pow(10.0, std::min(peak_dbfs, 0.0) / 20.0);
  double gain = 1.0;
  if (rep.input_peak > limit) {
    gain = limit / rep.input_peak;
    rep.limited = true;
    rep.gain_db = 20.0 * std::log10(gain);
  }
  // Scaling to int16 is done here, rounding to nearest (libsndfile's own float path
  // truncates when clipping is enabled, which costs 6 dB of SNR).
  std::vector<float> scaled;
  std::vector<short> pcm;
  if (format == SampleFormat::pcm16) {
    pcm.resize(samples.size());
    for (std::size_t i = 0; i < samples.size(); ++i)
      pcm[i] = short(std::clamp(std::lround(double(samples[i]) * gain * 32767.0), -32768L, 32767L));
  } else {
    scaled.resize(samples.size());
    for (std::size_t i = 0; i < samples.size(); ++i) scaled[i] = float(samples[i] * gain);
  }

  // libsndfile writes through the temporary file's descriptor; commit() renames it into place.
  AtomicFile out(path);
  SF_INFO sfinfo{};
  sfinfo.samplerate = sample_rate;
  sfinfo.channels = 1;
  sfinfo.format = SF_FORMAT_WAV | (format == SampleFormat::pcm16 ? SF_FORMAT_PCM_16 : SF_FORMAT_FLOAT);
  {
    SndfileHandle f(sf_open_fd(out.fd(), SFM_WRITE, &sfinfo, /*close_desc=*/SF_FALSE));
    if (!f) throw Error("cannot write '" + path + "': " + sf_strerror(nullptr));
    const sf_count_t n = sf_count_t(samples.size());
    const sf_count_t wrote = format == SampleFormat::pcm16 ? sf_writef_short(f.get(), pcm.data(), n)
                                                           : sf_writef_float(f.get(), scaled.data(), n);
    if (wrote != n) throw Error("cannot write '" + path + "': " + sf_strerror(f.get()));
    sf_write_sync(f.get());
  }
  out.commit();
  return rep;
}

}  // namespace tessera::audio
