// trainer.h — the training loop: corpus → segments → model → loss → Adam, with
// validation, metrics.jsonl, checkpoints (model + train state) and exact resume.
// B batch, M mels, T frames per segment, L = T / hop code frames, D latent dims.
//
// One step (seeded; the same config, seed and threads give the same weights):
//   x = B random segments, normalised [B, M, T];  d = draw_depth() (stage dropout);
//   TrainStep::run(x, d, lr) (train_step.h) with the warm-up + cosine learning rate.
#pragma once
#include <atomic>
#include <cstdint>
#include <functional>
#include <memory>
#include <random>
#include <string>
#include <vector>

#include "quant/corpus.h"
#include "quant/experiment_config.h"
#include "quant/lr_schedule.h"
#include "quant/tokenizer.h"
#include "quant/train_step.h"

namespace tessera::quant {

struct StepReport {
  std::int64_t step = 0, total = 0;
  double loss = 0, recon = 0, commitment = 0, lr = 0, grad_norm = 0;
  int depth = 0;
  double validation_loss = -1;   // last validation (normalised units), −1 before the first
  double validation_mel_l1 = -1; // last validation, natural-log units, full depth
  std::vector<int> codes_used;   // per stage, since the last log line
  double steps_per_s = 0, audio_s_per_s = 0, eta_s = 0;
};

struct ValidationReport {
  double loss = 0;                 // normalised L1 + L2 at full depth
  std::vector<double> mel_l1;      // per depth 1..S, natural-log units
};

struct ResumeReport {
  bool model_rewritten = false;    // model.safetensors was missing or older than the state
  int metrics_lines_dropped = 0;   // metrics.jsonl lines past the checkpoint (or cut short)
};

class Trainer {
 public:
  // Loads the corpus (cfg.train.corpus) and builds the model; nothing is written yet.
  Trainer(const ExperimentConfig& cfg, std::string run_dir,
          const std::function<void(std::size_t, std::size_t)>& load_progress = {});
  ~Trainer();

  // Continues from RUN/train-state.safetensors, the last complete checkpoint (throws if
  // absent or from another architecture); rewrites RUN/model.safetensors if it is missing
  // or older (killed between the two writes) and drops metrics.jsonl lines past the step.
  ResumeReport resume();
  // Trains up to cfg.train.steps (or until `stop` becomes true; then a checkpoint is
  // written before returning). Calls on_step after every step.
  void run(const std::atomic<bool>* stop, const std::function<void(const StepReport&)>& on_step);
  // Full-depth and per-depth validation on the fixed held-out segments.
  ValidationReport validate();
  // Writes train-state.safetensors, then model.safetensors, each atomically.
  void checkpoint();

  std::int64_t step() const { return step_; }
  const Corpus& corpus() const { return corpus_; }
  Tokenizer& model() { return *tok_; }
  std::string model_path() const;
  std::string state_path() const;
  std::string metrics_path() const;

 private:
  void kmeans_init();
  void draw_batch();
  void log_metrics(const StepReport& r);
  void log_validation(const ValidationReport& v);

  ExperimentConfig cfg_;
  std::string dir_;
  Corpus corpus_;
  std::unique_ptr<Tokenizer> tok_;
  std::unique_ptr<SegmentSampler> train_sampler_, val_sampler_;
  std::unique_ptr<TrainStep> step_fn_;
  LrSchedule schedule_;
  std::mt19937_64 rng_;
  std::int64_t step_ = 0;
  Tensor x_, z_;
  double last_val_loss_ = -1, last_val_l1_ = -1;
  // Sums over the steps since the last metrics line; saved with a checkpoint (with the
  // codebooks' usage counts) so that a resumed run logs the same lines as an unbroken one.
  struct LogWindow {
    double loss = 0, recon = 0, commitment = 0;
    std::int64_t steps = 0;
  } window_;
};

}  // namespace tessera::quant
