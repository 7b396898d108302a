// tokenizer.h — the whole model: normalisation, encoder, residual codebooks, decoder,
// with the inference paths audio features → codes → features.
// M mels, T frames, L code frames (T / hop), D latent dims, S stages, K codes, d depth.
#pragma once
#include <memory>
#include <string>

#include <Eigen/Core>

#include "quant/codebook/residual_codebooks.h"
#include "quant/corpus.h"
#include "quant/decoder.h"
#include "quant/encoder.h"
#include "quant/experiment_config.h"
#include "quant/param_slab.h"
#include "quant/tensor.h"
#include "quant/thread_pool.h"

namespace tessera::quant {

class Tokenizer {
 public:
  // Builds the layers of `cfg` with `threads` lanes (0 = all cores); weights are zero
  // until init() or a checkpoint fills them. Throws tessera::Error on a bad config.
  Tokenizer(const ExperimentConfig& cfg, int threads, int max_batch_vectors = 4096);

  // PyTorch-default initialisation of every layer from `seed`.
  void init(std::uint64_t seed);

  const ExperimentConfig& config() const { return cfg_; }
  ParamSlab& slab() { return slab_; }
  const ParamSlab& slab() const { return slab_; }
  Encoder& encoder() { return enc_; }
  Decoder& decoder() { return dec_; }
  ResidualCodebooks& codebooks() { return rvq_; }
  const ResidualCodebooks& codebooks() const { return rvq_; }
  BandStats& stats() { return stats_; }
  const BandStats& stats() const { return stats_; }
  ThreadPool& pool() { return pool_; }
  int hop() const { return cfg_.model.hop(); }

  // Natural-log log-mel M x T (unnormalised) → codes L x depth, L = T / hop (frames past
  // the last whole code frame are dropped).
  Eigen::MatrixXi encode(const Eigen::MatrixXf& log_mel, int depth);
  // Codes L x (>= depth) → log-mel M x (L·hop), unnormalised natural log.
  Eigen::MatrixXf decode(const Eigen::MatrixXi& codes, int depth);
  // decode(encode(log_mel, depth), depth): what the first `depth` stages keep.
  Eigen::MatrixXf reconstruct(const Eigen::MatrixXf& log_mel, int depth);

 private:
  ExperimentConfig cfg_;
  ThreadPool pool_;
  ParamSlab slab_;
  Encoder enc_;
  Decoder dec_;
  ResidualCodebooks rvq_;
  BandStats stats_;
  Tensor x_, z_, zq_, y_;  // inference scratch
};

// Threads for a `threads` setting: 0 means every hardware thread.
int resolve_threads(int threads);

}  // namespace tessera::quant
