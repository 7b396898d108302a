// experiment_config_test.cpp — the four sections of an experiment file: defaults,
// located errors, cross-section checks and the resolved form.
#include <doctest/doctest.h>

#include <filesystem>
#include <string>

#include "audio/error.h"
#include "quant/experiment_config.h"

using namespace tessera;
using namespace tessera::quant;

namespace {

std::string error_of(const std::string& yaml, std::vector<std::string> sets = {}) {
  try {
    ConfigDocument d = ConfigDocument::parse(yaml, "exp.yaml");
    for (const auto& s : sets) d.apply_override(s);
    read_experiment(d);
  } catch (const Error& e) {
    return e.what();
  }
  return "no error";
}

}  // namespace

TEST_CASE("defaults are the reference architecture of the design") {
  const ExperimentConfig e = load_experiment("", {});
  CHECK(e.model.channels == 256);
  CHECK(e.model.latent_dim == 128);
  CHECK(e.model.hop() == 4);
  CHECK(e.codebooks.stages == 8);
  CHECK(e.codebooks.codes == 1024);
  CHECK(e.codebooks.dim == 128);  // follows model.latent_dim
  CHECK(e.code_rate() == doctest::Approx(25.0));
  CHECK(e.train.batch_size == 16);
  CHECK(e.train.segment_frames == 200);
}

TEST_CASE("linked settings follow each other") {
  const ExperimentConfig e = load_experiment("", {"audio.n_mels=64", "model.latent_dim=32"});
  CHECK(e.model.n_mels == 64);
  CHECK(e.codebooks.dim == 32);
}

TEST_CASE("errors point at the file, line and key") {
  CHECK(error_of("model:\n  channels: 0\n") == "exp.yaml:2: model.channels: expected an integer from 1 to 4096, got 0");
  CHECK(error_of("codebooks:\n  stages: 4\n  codez: 3\n").find("exp.yaml:3: codebooks.codez: unknown key") == 0);
  CHECK(error_of("codebooks:\n  learning: adam\n") ==
        "exp.yaml:2: codebooks.learning: expected one of ema, loss, got 'adam'");
  CHECK(error_of("model:\n  strides: [2, 3]\n").find("exp.yaml:2: model.strides: expected even strides") == 0);
  CHECK(error_of("model:\n  strides: 2\n").find("exp.yaml:2: model.strides: expected a list") == 0);
  CHECK(error_of("train:\n  segment_frames: 202\n").find("exp.yaml:2: train.segment_frames: must be a multiple") == 0);
  CHECK(error_of("train:\n  steps: 10\n  warmup_steps: 20\n").find("exp.yaml:3: train.warmup_steps") == 0);
  CHECK(error_of("codebooks:\n  stages: 32\n  codes: 16384\n").find("exp.yaml:2: codebooks.stages:") == 0);
  CHECK(error_of("train:\n  batch_size: -1\n") == "exp.yaml:2: train.batch_size: expected an integer from 1 to 4096, got -1");
  CHECK(error_of("", {"train.learning_rate=fast"}) == "--set train.learning_rate: expected a number, got 'fast'");
}

TEST_CASE("the resolved YAML reads back to the same settings") {
  const ExperimentConfig a = load_experiment("", {"model.channels=96", "codebooks.stages=4", "codebooks.codes=256",
                                                  "codebooks.learning=loss", "train.corpus=some/folder",
                                                  "model.dilations=[1, 2]"});
  const std::string y = resolved_yaml(a);
  const ExperimentConfig b = parse_experiment(y, "resolved");
  CHECK(resolved_yaml(b) == y);
  CHECK(b.model.channels == 96);
  CHECK(b.model.dilations == std::vector<int>{1, 2});
  CHECK(b.codebooks.learning == CodebookConfig::Learning::loss);
  CHECK(b.train.corpus == "some/folder");
}

TEST_CASE("the shipped experiment files load") {
  for (const char* f : {"configs/demo.yaml", "configs/speech16k.yaml", "configs/telephone8k.yaml", "configs/bench.yaml"}) {
    CAPTURE(f);
    const std::string path = std::string(TESSERA_SOURCE_DIR) + "/" + f;
    if (!std::filesystem::exists(path)) { FAIL("missing " << f); continue; }
    CHECK_NOTHROW(load_experiment(path, {}));
  }
}

TEST_CASE("configs/bench.yaml is the built-in defaults, which `tessera bench` times without --config") {
  // The reference architecture of torch_reference.py (80 mels, 256 channels, 128-dim latent,
  // strides 2·2, 8 × 1024 codes, batch 16 × 200, lr 3e-4) is both; if they drift apart the
  // bench's "built-in defaults (= configs/bench.yaml)" line would lie.
  const ExperimentConfig file = load_experiment(std::string(TESSERA_SOURCE_DIR) + "/configs/bench.yaml", {});
  CHECK(resolved_yaml(file) == resolved_yaml(load_experiment("", {})));
}
