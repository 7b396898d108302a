// tokenizer_api_test.cpp — the library API other programs link (tokenizer.h): load,
// encode(samples), decode(codes, depth), synthesize(log_mel); determinism and refusals.
#include <doctest/doctest.h>

#include <filesystem>
#include <unistd.h>

#include "audio/error.h"
#include "quant/checkpoint.h"
#include "synthetic_speech.h"

using namespace tessera;
using namespace tessera::quant;
namespace fs = std::filesystem;

namespace {

ExperimentConfig small() {
  return load_experiment("", {"model.channels=24", "model.latent_dim=8", "codebooks.stages=3", "codebooks.codes=16",
                              "audio.griffin_lim_iters=4"});
}

struct SavedModel {
  fs::path dir = fs::temp_directory_path() / ("tessera-api-" + std::to_string(::getpid()));
  std::string path = (dir / "m.safetensors").string();
  SavedModel() {
    fs::create_directories(dir);
    Tokenizer t(small(), 1);
    t.init(11);  // codebooks start as N(0, 1) draws (residual_codebooks.h)
    save_model(t, path, 1);
  }
  ~SavedModel() { fs::remove_all(dir); }
};

}  // namespace

TEST_CASE("Tokenizer::load + encode(samples) + decode + synthesize: the documented round trip") {
  SavedModel m;
  auto tok = Tokenizer::load(m.path, 1);
  CHECK(tok->sample_rate() == 16000);
  CHECK(tok->stages() == 3);
  const auto x = testing::synthetic_speech(1.5, 16000, 9);
  const Eigen::MatrixXi codes = tok->encode(x);  // all stages by default
  CHECK(codes.cols() == 3);
  // 100 feature frames/s, stride 4: 25 code frames per second (whole frames only).
  CHECK(codes.rows() == tok->log_mel(x).cols() / 4);
  CHECK(codes.minCoeff() >= 0);
  CHECK(codes.maxCoeff() < 16);
  // encode(samples) is exactly encode(log_mel(samples)).
  CHECK(codes == tok->encode(tok->log_mel(x), 3));
  CHECK(tok->encode(x, 2) == codes.leftCols(2));

  const Eigen::MatrixXf mel = tok->decode(codes, 2);
  CHECK(mel.rows() == 80);
  CHECK(mel.cols() == codes.rows() * 4);
  CHECK(mel.allFinite());
  const std::vector<float> y = tok->synthesize(mel);
  // One hop of samples per feature frame (hop 160 at 16 kHz), give or take the window edge.
  CHECK(std::abs(double(y.size()) - double(mel.cols()) * 160) <= 1024);
  bool finite = true;
  for (float v : y) finite = finite && std::isfinite(v);
  CHECK(finite);
}

TEST_CASE("encoding the same audio twice, or with more threads, gives identical codes") {
  SavedModel m;
  auto one = Tokenizer::load(m.path, 1), two = Tokenizer::load(m.path, 2);
  const auto x = testing::synthetic_speech(3.0, 16000, 21);
  const Eigen::MatrixXi a = one->encode(x);
  CHECK(a == one->encode(x));  // scratch buffers reused: no state carried between calls
  CHECK(a == two->encode(x));
  // Something other than one code everywhere, or the comparisons above prove nothing.
  CHECK(a.col(0).maxCoeff() != a.col(0).minCoeff());
}

TEST_CASE("the caller's thread count runs the code search, not the trained model's train.threads") {
  const fs::path dir = fs::temp_directory_path() / ("tessera-api-threads-" + std::to_string(::getpid()));
  fs::create_directories(dir);
  const std::string path = (dir / "m.safetensors").string();
  ExperimentConfig cfg = small();
  cfg.train.threads = cfg.codebooks.threads = 512;  // as a model trained on a big machine stores it
  {
    Tokenizer t(cfg, 1);
    t.init(11);
    save_model(t, path, 1);
  }
  auto tok = Tokenizer::load(path, 2);
  CHECK(tok->config().train.threads == 512);  // the stored config itself is kept
  CHECK(tok->codebooks().config().threads == 2);
  CHECK(tok->pool().size() == 2);
  fs::remove_all(dir);
}

TEST_CASE("the library refuses bad requests with tessera::Error, never a crash") {
  SavedModel m;
  auto tok = Tokenizer::load(m.path, 1);
  const auto x = testing::synthetic_speech(1.0, 16000, 4);
  CHECK_THROWS_WITH_AS(tok->encode(x, 4), doctest::Contains("outside 1..3"), Error);
  CHECK_THROWS_WITH_AS(tok->encode(x, -1), doctest::Contains("outside 1..3"), Error);
  CHECK_THROWS_WITH_AS(tok->encode(std::vector<float>(100, 0.1f)), doctest::Contains("too short"), Error);
  const Eigen::MatrixXi codes = tok->encode(x);
  CHECK_THROWS_WITH_AS(tok->decode(codes, 0), doctest::Contains("outside"), Error);
  CHECK_THROWS_WITH_AS(tok->decode(codes.leftCols(2), 3), doctest::Contains("outside 1..2"), Error);
  Eigen::MatrixXi bad = codes;
  bad(2, 1) = 16;
  CHECK_THROWS_WITH_AS(tok->decode(bad, 2), doctest::Contains("outside 0..15"), Error);
  bad(2, 1) = -1;
  CHECK_THROWS_WITH_AS(tok->decode(bad, 2), doctest::Contains("outside 0..15"), Error);
  CHECK_NOTHROW(tok->decode(bad, 1));  // only the stages used are checked
  CHECK_THROWS_WITH_AS(Tokenizer::load((m.dir / "missing.safetensors").string()), doctest::Contains("missing.safetensors"),
                       Error);
}
