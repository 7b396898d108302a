// train_config.h — the typed `train:` section: corpus, segments, optimiser, schedule, threads.
#pragma once
#include <string>

namespace tessera::quant {

struct TrainConfig {
  std::string corpus;            // folder (searched recursively) or a list file of audio paths
  double validation_share = 0.1; // share of files held out, chosen by a hash of the path
  int segment_frames = 200;      // frames per training segment (2 s at 100 frames/s)
  int batch_size = 16;
  int steps = 2000;
  double learning_rate = 3e-4;
  int warmup_steps = 100;        // linear warm-up, then cosine decay
  double min_lr_ratio = 0.05;    // final learning rate as a share of learning_rate
  double weight_decay = 0.0;     // decoupled (AdamW) when > 0
  double beta1 = 0.9, beta2 = 0.999, adam_epsilon = 1e-8;
  double grad_clip = 1.0;        // global L2 norm; 0 disables
  double l1_weight = 1.0;        // loss = l1·L1 + l2·L2 (normalised log-mel) + commitment
  double l2_weight = 1.0;
  int threads = 0;               // 0 = all cores
  int seed = 1;
  int log_every = 25;            // steps between metrics.jsonl lines
  int validate_every = 250;      // steps between validations
  int validation_segments = 64;  // fixed held-out segments per validation
  int checkpoint_every = 500;    // steps between checkpoints
};

}  // namespace tessera::quant
