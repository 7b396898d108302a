// chunked_synthesis_test.cpp — Griffin-Lim of long outputs in overlapping chunks, and the
// block-by-block WAV writer: what equals the whole-signal path exactly, and how close the
// rest comes.
#include <doctest/doctest.h>

#include <cmath>
#include <filesystem>
#include <unistd.h>

#include "audio/audio_io.h"
#include "audio/chunked_synthesis.h"
#include "audio/error.h"
#include "audio/log_mel.h"
#include "audio/mel_inverse.h"
#include "audio/wav_writer.h"
#include "synthetic_speech.h"

using namespace tessera;
using namespace tessera::audio;

namespace {

std::vector<float> synthesize(const AudioConfig& cfg, const Eigen::MatrixXf& mel, int chunk, Eigen::Index block) {
  std::vector<float> out;
  ChunkedSynthesis syn(cfg, [&](const float* x, std::size_t n) { out.insert(out.end(), x, x + n); }, chunk);
  for (Eigen::Index t = 0; t < mel.cols(); t += block) syn.push(mel.middleCols(t, std::min(block, mel.cols() - t)));
  syn.finish();
  return out;
}

// Mean |log-mel(y) − target| over the frames: how well y carries the target (the quantity
// mel-consistent Griffin-Lim drives down).
double mel_error(const AudioConfig& cfg, const std::vector<float>& y, const Eigen::MatrixXf& target) {
  const Eigen::MatrixXf got = log_mel(cfg, y);
  const Eigen::Index T = std::min(got.cols(), target.cols());
  return (got.leftCols(T) - target.leftCols(T)).cwiseAbs().mean();
}

}  // namespace

TEST_CASE("chunked synthesis: one chunk is invert_log_mel exactly; longer ones are close and block-size independent") {
  AudioConfig cfg;
  cfg.griffin_lim_iters = 16;
  const auto x = testing::synthetic_speech(6.0, 16000, 5);
  const Eigen::MatrixXf mel = log_mel(cfg, x);  // 601 frames
  const std::vector<float> whole = invert_log_mel(cfg, mel, 0);
  CHECK(synthesize(cfg, mel, ChunkedSynthesis::kDefaultChunk, 97) == whole);

  // 150-frame chunks (1.5 s): four borders in 6 s.
  const std::vector<float> a = synthesize(cfg, mel, 150, mel.cols());
  const std::vector<float> b = synthesize(cfg, mel, 150, 13);
  CHECK(a.size() == whole.size());  // hop·(T − 1) samples (stft.h)
  CHECK(a == b);
  const double e_whole = mel_error(cfg, whole, mel), e_chunked = mel_error(cfg, a, mel);
  MESSAGE("log-mel L1 of the output: whole " << e_whole << ", 150-frame chunks " << e_chunked);
  CHECK(e_chunked <= 1.15 * e_whole);
  CHECK_THROWS_WITH_AS(ChunkedSynthesis(cfg, {}, 100, 4), "synthesis overlap of 4 frames is too short for n_fft 1024 and hop 160", Error);
}

TEST_CASE("WavWriter: blocks written one by one get the whole signal's peak limit") {
  const auto dir = std::filesystem::temp_directory_path() / ("tessera-wavw-" + std::to_string(::getpid()));
  std::filesystem::create_directories(dir);
  const std::string path = (dir / "w.wav").string();
  std::vector<float> quiet(1000, 0.25f), loud(1000, 2.0f);
  WavWriter w(path, 16000, SampleFormat::float32, -6.0);
  w.write(quiet.data(), quiet.size());
  w.write(loud.data(), loud.size());
  CHECK_FALSE(std::filesystem::exists(path));  // nothing is visible before commit
  const SaveReport rep = w.commit();
  CHECK(rep.limited);
  CHECK(rep.clipped == 1000);
  const std::vector<float> y = load_audio(path).samples;
  REQUIRE(y.size() == 2000);
  const double limit = std::pow(10.0, -6.0 / 20.0);  // −6 dBFS as an amplitude, 10^(dB/20) (common practice)
  CHECK(y[1500] == doctest::Approx(limit).epsilon(1e-6));
  CHECK(y[10] == doctest::Approx(limit / 8).epsilon(1e-6));  // one gain for both blocks
  std::filesystem::remove_all(dir);
}
