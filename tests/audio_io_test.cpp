// audio_io_test.cpp — loading every supported format, saving with peak limiting,
// quantisation noise of 16-bit output, and refusal of bad files.
#include <doctest/doctest.h>

#include <cmath>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <numbers>
#include <string>
#include <vector>

#include <sndfile.h>
#include <unistd.h>

#include "audio/audio_io.h"
#include "audio/error.h"

using namespace tessera;
using namespace tessera::audio;
namespace fs = std::filesystem;

namespace {

fs::path scratch_dir() {
  fs::path d = fs::temp_directory_path() / ("tessera-io-test-" + std::to_string(::getpid()));
  fs::create_directories(d);
  return d;
}

std::vector<float> tone(double freq, int rate, double seconds, double amp, double phase = 0) {
  std::vector<float> x(std::size_t(seconds * rate));
  for (std::size_t i = 0; i < x.size(); ++i)
    x[i] = float(amp * std::sin(2 * std::numbers::pi * freq * double(i) / rate + phase));
  return x;
}

// Writes interleaved frames with libsndfile in the given format (independent of save_wav).
void write_with_sndfile(const fs::path& p, int format, int channels, int rate,
                        const std::vector<float>& interleaved) {
  SF_INFO info{};
  info.samplerate = rate;
  info.channels = channels;
  info.format = format;
  SNDFILE* f = sf_open(p.c_str(), SFM_WRITE, &info);
  REQUIRE_MESSAGE(f != nullptr, sf_strerror(nullptr));
  sf_writef_float(f, interleaved.data(), sf_count_t(interleaved.size() / channels));
  sf_close(f);
}

double max_abs_diff(const std::vector<float>& a, const std::vector<float>& b) {
  double m = 0;
  for (std::size_t i = 0; i < std::min(a.size(), b.size()); ++i) m = std::max(m, double(std::fabs(a[i] - b[i])));
  return m;
}

}  // namespace

TEST_CASE("every supported container and bit depth loads back what was written") {
  const fs::path dir = scratch_dir();
  const std::vector<float> x = tone(440, 16000, 0.5, 0.5);
  struct Case { const char* name; int format; double tol; };
  // Tolerances: half a quantisation step of each depth (common practice), lossy Vorbis loose.
  const Case cases[] = {
      {"u8.wav", SF_FORMAT_WAV | SF_FORMAT_PCM_U8, 1.0 / 128},
      {"s16.wav", SF_FORMAT_WAV | SF_FORMAT_PCM_16, 1.0 / 32768},
      {"s24.wav", SF_FORMAT_WAV | SF_FORMAT_PCM_24, 1.0 / 8388608 * 2},
      {"s32.wav", SF_FORMAT_WAV | SF_FORMAT_PCM_32, 1e-6},
      {"f32.wav", SF_FORMAT_WAV | SF_FORMAT_FLOAT, 1e-7},
      {"s16.flac", SF_FORMAT_FLAC | SF_FORMAT_PCM_16, 1.0 / 32768},
      {"s24.flac", SF_FORMAT_FLAC | SF_FORMAT_PCM_24, 1.0 / 8388608 * 2},
      {"s16.aiff", SF_FORMAT_AIFF | SF_FORMAT_PCM_16, 1.0 / 32768},
      {"s24.aiff", SF_FORMAT_AIFF | SF_FORMAT_PCM_24, 1.0 / 8388608 * 2},
      {"vorbis.ogg", SF_FORMAT_OGG | SF_FORMAT_VORBIS, 0.05},
  };
  for (const Case& c : cases) {
    CAPTURE(c.name);
    write_with_sndfile(dir / c.name, c.format, 1, 16000, x);
    SourceInfo info;
    const Audio a = load_audio((dir / c.name).string(), &info);
    CHECK(a.sample_rate == 16000);
    CHECK(info.channels == 1);
    REQUIRE(a.samples.size() == x.size());
    CHECK(max_abs_diff(a.samples, x) <= c.tol);
  }
  fs::remove_all(dir);
}

TEST_CASE("stereo is averaged to mono") {
  const fs::path dir = scratch_dir();
  std::vector<float> st;
  for (int i = 0; i < 1000; ++i) { st.push_back(0.5f); st.push_back(-0.25f); }
  write_with_sndfile(dir / "st.wav", SF_FORMAT_WAV | SF_FORMAT_FLOAT, 2, 8000, st);
  const Audio a = load_audio((dir / "st.wav").string());
  REQUIRE(a.samples.size() == 1000);
  CHECK(a.samples[17] == doctest::Approx(0.125).epsilon(1e-7));
  fs::remove_all(dir);
}

TEST_CASE("a full-scale 997 Hz sine through 16-bit output has SNR near 6.02*16 + 1.76 dB") {
  // Textbook rule for the quantisation noise of a full-scale sine: 6.02 N + 1.76 dB
  // (e.g. Oppenheim & Schafer, Discrete-Time Signal Processing). 997 Hz is the usual
  // test frequency that avoids a short repeating pattern of sample values (common practice).
  const fs::path dir = scratch_dir();
  const int rate = 48000;
  const std::vector<float> x = tone(997, rate, 2.0, 1.0, 0.3);
  save_wav((dir / "sine.wav").string(), x, rate, SampleFormat::pcm16, /*peak_dbfs=*/0.0);
  const Audio y = load_audio((dir / "sine.wav").string());
  REQUIRE(y.samples.size() == x.size());
  // Remove the fixed gain of the int16 scaling (32767 on write vs 32768 on read) by a
  // least-squares fit, so only the quantisation noise is measured.
  double xy = 0, yy = 0;
  for (std::size_t i = 0; i < x.size(); ++i) { xy += double(x[i]) * y.samples[i]; yy += double(y.samples[i]) * y.samples[i]; }
  const double g = xy / yy;
  double sig = 0, noise = 0;
  for (std::size_t i = 0; i < x.size(); ++i) {
    sig += double(x[i]) * x[i];
    const double e = x[i] - g * y.samples[i];
    noise += e * e;
  }
  const double snr = 10 * std::log10(sig / noise);
  MESSAGE("16-bit SNR = " << snr << " dB (rule: 98.08 dB)");
  CHECK(std::fabs(snr - (6.02 * 16 + 1.76)) < 1.0);
  fs::remove_all(dir);
}

TEST_CASE("saving peak-limits to -1 dBFS by default and reports clipping") {
  const fs::path dir = scratch_dir();
  std::vector<float> x = tone(300, 16000, 0.2, 2.0);  // 6 dB over full scale
  const SaveReport rep = save_wav((dir / "loud.wav").string(), x, 16000, SampleFormat::float32);
  CHECK(rep.clipped > 0);
  CHECK(rep.limited);
  const Audio y = load_audio((dir / "loud.wav").string());
  float peak = 0;
  for (float s : y.samples) peak = std::max(peak, std::fabs(s));
  CHECK(20 * std::log10(peak) == doctest::Approx(-1.0).epsilon(1e-4));
  // A quiet signal is never scaled up.
  std::vector<float> q = tone(300, 16000, 0.2, 0.1);
  const SaveReport rq = save_wav((dir / "quiet.wav").string(), q, 16000, SampleFormat::float32);
  CHECK_FALSE(rq.limited);
  CHECK(rq.clipped == 0);
  CHECK(max_abs_diff(load_audio((dir / "quiet.wav").string()).samples, q) < 1e-7);
  fs::remove_all(dir);
}

TEST_CASE("bad files are refused with a message naming the file") {
  const fs::path dir = scratch_dir();
  auto message_of = [](const fs::path& p) {
    try { load_audio(p.string()); } catch (const Error& e) { return std::string(e.what()); }
    return std::string("no error");
  };
  CHECK(message_of(dir / "missing.wav").find("no such file") != std::string::npos);

  std::ofstream(dir / "text.wav") << "this is not audio, only words\n";
  CHECK(message_of(dir / "text.wav").find("text.wav") != std::string::npos);

  std::ofstream(dir / "empty.wav").close();
  CHECK(message_of(dir / "empty.wav").find("empty.wav") != std::string::npos);

  // A WAV cut inside its header.
  write_with_sndfile(dir / "whole.wav", SF_FORMAT_WAV | SF_FORMAT_PCM_16, 1, 16000, tone(440, 16000, 0.1, 0.5));
  {
    std::ifstream in(dir / "whole.wav", std::ios::binary);
    std::string bytes((std::istreambuf_iterator<char>(in)), {});
    std::ofstream(dir / "cut.wav", std::ios::binary).write(bytes.data(), 30);
    std::ofstream(dir / "cut-data.wav", std::ios::binary).write(bytes.data(), 44 + 200);
  }
  CHECK(message_of(dir / "cut.wav").find("cut.wav") != std::string::npos);
  // Cut inside the samples: refused, not half-read.
  CHECK(message_of(dir / "cut-data.wav").find("truncated") != std::string::npos);

  std::vector<float> nan(1000, std::nanf(""));
  write_with_sndfile(dir / "nan.wav", SF_FORMAT_WAV | SF_FORMAT_FLOAT, 1, 16000, nan);
  CHECK(message_of(dir / "nan.wav").find("non-finite") != std::string::npos);
  fs::remove_all(dir);
}

TEST_CASE("a failed save leaves no file behind") {
  const fs::path dir = scratch_dir();
  std::vector<float> x = tone(300, 16000, 0.1, 0.5);
  CHECK_THROWS_AS(save_wav((dir / "no-such-folder" / "o.wav").string(), x, 16000), Error);
  x[10] = std::nanf("");
  CHECK_THROWS_AS(save_wav((dir / "nan-out.wav").string(), x, 16000), Error);
  CHECK_FALSE(fs::exists(dir / "nan-out.wav"));
  for (const auto& e : fs::directory_iterator(dir)) FAIL("left behind: " << e.path());
  fs::remove_all(dir);
}

TEST_CASE("loading measures the peak and the samples clipped in runs of 3 or more") {
  const fs::path dir = scratch_dir();
  std::vector<float> square(1600);
  for (std::size_t i = 0; i < square.size(); ++i) square[i] = (i / 40) % 2 ? 1.0f : -1.0f;   // 200 Hz at 16 kHz
  write_with_sndfile(dir / "square.wav", SF_FORMAT_WAV | SF_FORMAT_PCM_16, 1, 16000, square);
  std::vector<float> peaks = tone(300, 16000, 0.1, 0.5);
  peaks[100] = peaks[500] = 1.0f;   // isolated full-scale samples: not clipping
  write_with_sndfile(dir / "peaks.wav", SF_FORMAT_WAV | SF_FORMAT_PCM_16, 1, 16000, peaks);
  write_with_sndfile(dir / "silent.wav", SF_FORMAT_WAV | SF_FORMAT_PCM_16, 1, 16000, std::vector<float>(1600, 0.0f));
  SourceInfo info;
  load_audio((dir / "square.wav").string(), &info);
  CHECK(info.clipped_samples == 1600);
  load_audio((dir / "peaks.wav").string(), &info);
  CHECK(info.clipped_samples == 0);
  CHECK(info.peak == doctest::Approx(1.0).epsilon(1e-4));
  load_audio((dir / "silent.wav").string(), &info);
  CHECK(info.peak == 0.0f);
  fs::remove_all(dir);
}
