// train_test.cpp — the training loop end to end on a small synthetic corpus: it learns,
// uses its codes, and resumes bit-identically.
#include <doctest/doctest.h>

#include <atomic>
#include <filesystem>
#include <unistd.h>

#include "quant/checkpoint.h"
#include "quant/experiment_config.h"
#include "quant/trainer.h"
#include "synthetic_speech.h"

using namespace tessera;
using namespace tessera::quant;
namespace fs = std::filesystem;

namespace {

fs::path scratch(const std::string& name) {
  fs::path d = fs::temp_directory_path() / ("tessera-train-test-" + std::to_string(::getpid())) / name;
  fs::remove_all(d);
  fs::create_directories(d);
  return d;
}

// A tiny model on a 16 kHz synthetic corpus: fast enough for a unit test.
ExperimentConfig tiny_config(const fs::path& corpus, int steps) {
  return load_experiment("", {"train.corpus=" + corpus.string(), "model.channels=32", "model.latent_dim=16",
                              "codebooks.stages=2", "codebooks.codes=32", "codebooks.kmeans_init_batches=2",
                              "codebooks.kmeans_init_vectors=256", "codebooks.dead_after_steps=20",
                              "train.segment_frames=64", "train.batch_size=8", "train.steps=" + std::to_string(steps),
                              "train.warmup_steps=5", "train.learning_rate=3e-3", "train.threads=2",
                              "train.validate_every=1000", "train.checkpoint_every=1000", "train.log_every=10",
                              "train.validation_segments=16", "train.validation_share=0.25"});
}

}  // namespace

TEST_CASE("a 60-step run lowers validation loss by 30% and uses half of stage 1's codes") {
  const fs::path root = scratch("learn");
  testing::write_synthetic_corpus(root / "corpus", 8, 3.0, 16000, 7);
  const ExperimentConfig cfg = tiny_config(root / "corpus", 60);
  Trainer t(cfg, (root / "run").string());
  REQUIRE_FALSE(t.corpus().validation.empty());
  const double before = t.validate().loss;
  int stage1_used = 0;
  t.run(nullptr, [&](const StepReport& r) {
    if (!r.codes_used.empty()) stage1_used = r.codes_used[0];  // over the last 10 steps
  });
  const ValidationReport after = t.validate();
  MESSAGE("validation loss " << before << " -> " << after.loss << "; stage-1 codes used " << stage1_used << "/32");
  CHECK(after.loss <= 0.7 * before);
  CHECK(stage1_used >= 16);
  // Depth 2 is at least as good as depth 1 (residual stages refine).
  CHECK(after.mel_l1[1] <= after.mel_l1[0] * 1.02);
  // The files a run must leave behind.
  CHECK(fs::exists(root / "run" / "model.safetensors"));
  CHECK(fs::exists(root / "run" / "train-state.safetensors"));
  CHECK(fs::exists(root / "run" / "config.yaml"));
  CHECK(fs::file_size(root / "run" / "metrics.jsonl") > 0);
  fs::remove_all(root);
}

TEST_CASE("2 x 50 steps with a resume between give the weights of 100 steps straight") {
  const fs::path root = scratch("resume");
  testing::write_synthetic_corpus(root / "corpus", 6, 2.0, 16000, 11);
  const ExperimentConfig cfg = tiny_config(root / "corpus", 100);

  Trainer straight(cfg, (root / "straight").string());
  straight.run(nullptr, {});

  {
    Trainer first(cfg, (root / "split").string());
    std::atomic<bool> stop{false};
    first.run(&stop, [&](const StepReport& r) { if (r.step == 50) stop = true; });
    REQUIRE(first.step() == 50);
  }
  Trainer second(cfg, (root / "split").string());
  second.resume();
  CHECK(second.step() == 50);
  second.run(nullptr, {});
  REQUIRE(second.step() == 100);

  const ParamSlab& a = straight.model().slab();
  const ParamSlab& b = second.model().slab();
  REQUIRE(a.count() == b.count());
  std::size_t differ = 0;
  for (std::size_t i = 0; i < a.count(); ++i) differ += a.params()[i] != b.params()[i];
  CHECK(differ == 0);
  const auto ca = straight.model().codebooks().codebooks();
  const auto cb = second.model().codebooks().codebooks();
  CHECK(std::equal(ca.begin(), ca.end(), cb.begin()));
  // The model files carry the same id.
  ModelInfo ia, ib;
  load_model(straight.model_path(), 1, &ia);
  load_model(second.model_path(), 1, &ib);
  CHECK(ia.model_id == ib.model_id);
  fs::remove_all(root);
}

TEST_CASE("resume refuses a changed architecture and a missing checkpoint") {
  const fs::path root = scratch("refuse");
  testing::write_synthetic_corpus(root / "corpus", 4, 1.5, 16000, 3);
  ExperimentConfig cfg = tiny_config(root / "corpus", 10);
  {
    Trainer t(cfg, (root / "empty").string());
    CHECK_THROWS_WITH_AS(t.resume(), doctest::Contains("holds no train-state"), Error);
  }
  {
    Trainer t(cfg, (root / "run").string());
    t.run(nullptr, {});
  }
  cfg.codebooks.codes = 64;
  Trainer other(cfg, (root / "run").string());
  CHECK_THROWS_WITH_AS(other.resume(), doctest::Contains("settings differ"), Error);
  fs::remove_all(root);
}

TEST_CASE("a run killed between the state and the model write resumes from the state") {
  const fs::path root = scratch("between");
  testing::write_synthetic_corpus(root / "corpus", 4, 1.5, 16000, 5);
  ExperimentConfig cfg = tiny_config(root / "corpus", 20);
  cfg.train.checkpoint_every = 10;
  const fs::path run = root / "run";
  std::string id20;
  {
    Trainer t(cfg, run.string());
    std::atomic<bool> stop{false};
    // Keep the model file of step 10 aside and put it back after step 20: the state is
    // then one checkpoint ahead of the model, as after a kill between the two renames.
    t.run(&stop, [&](const StepReport& r) {
      if (r.step == 10) fs::copy_file(t.model_path(), root / "model-10.safetensors");
    });
    id20 = model_id_of(t.model());
  }
  fs::copy_file(root / "model-10.safetensors", run / "model.safetensors", fs::copy_options::overwrite_existing);
  Trainer again(cfg, run.string());
  const ResumeReport rep = again.resume();
  CHECK(rep.model_rewritten);
  CHECK(again.step() == 20);
  ModelInfo info;
  load_model(again.model_path(), 1, &info);
  CHECK(info.model_id == id20);
  CHECK(info.step == 20);
  // A missing model file is rebuilt the same way.
  fs::remove(run / "model.safetensors");
  Trainer third(cfg, run.string());
  CHECK(third.resume().model_rewritten);
  load_model(third.model_path(), 1, &info);
  CHECK(info.model_id == id20);
  fs::remove_all(root);
}
