// work.h — the pieces of work tessera's benchmarks time, set up as the PyTorch peer
// (torch_reference.py) sets up its own: untrained PyTorch-default weights (the cost does
// not depend on them), unit-variance random features, the config's shapes.
//   train    one optimiser step on a batch of train.batch_size × train.segment_frames
//            (encoder, codebook search + EMA, decoder, backward, clipping, Adam)
//   encode   normalised log-mel of `frames` frames → codes of every stage
//   decode   codes → log-mel
//   resynth  log-mel → audio by the config's inversion (mel-consistent fast Griffin-Lim)
// Each returns the milliseconds of `repeats` runs after `warmup` untimed ones.
#pragma once
#include <vector>

#include "quant/experiment_config.h"

namespace tessera::bench {

std::vector<double> time_train_steps(const quant::ExperimentConfig& cfg, int threads, int warmup, int repeats);
std::vector<double> time_encode(const quant::ExperimentConfig& cfg, int threads, int frames, int warmup, int repeats);
std::vector<double> time_decode(const quant::ExperimentConfig& cfg, int threads, int frames, int warmup, int repeats);
// `samples` of audio at cfg.sample_rate; its log-mel is computed once, untimed.
std::vector<double> time_resynth(const audio::AudioConfig& cfg, const std::vector<float>& samples, int warmup,
                                 int repeats);

}  // namespace tessera::bench
