// tokenizer.cpp — model assembly and the inference paths.
#include "quant/tokenizer.h"

#include <thread>

#include "audio/error.h"

namespace tessera::quant {

int resolve_threads(int threads) {
  if (threads > 0) return threads;
  const unsigned hw = std::thread::hardware_concurrency();
  return hw ? int(hw) : 1;
}

Tokenizer::Tokenizer(const ExperimentConfig& cfg, int threads, int max_batch_vectors)
    : cfg_(cfg),
      pool_(resolve_threads(threads)),
      enc_(cfg.model, slab_, pool_),
      dec_(cfg.model, slab_, pool_),
      rvq_(cfg.codebooks, max_batch_vectors) {
  stats_.mean = Eigen::VectorXf::Zero(cfg.model.n_mels);
  stats_.std = Eigen::VectorXf::Ones(cfg.model.n_mels);
}

void Tokenizer::init(std::uint64_t seed) {
  std::mt19937_64 rng(seed);
  enc_.init(slab_, rng);
  dec_.init(slab_, rng);
}

Eigen::MatrixXi Tokenizer::encode(const Eigen::MatrixXf& log_mel, int depth) {
  const int M = cfg_.model.n_mels;
  if (log_mel.rows() != M)
    throw Error("features have " + std::to_string(log_mel.rows()) + " mel bands; the model expects " +
                std::to_string(M));
  const int T = int(log_mel.cols()) / hop() * hop();
  if (T < hop()) throw Error("audio too short: needs at least " + std::to_string(hop()) + " frames");
  x_.resize(1, M, T);
  x_.mat(0) = (log_mel.leftCols(T).colwise() - stats_.mean).array().colwise() / stats_.std.array();
  enc_.forward(x_, z_, slab_, /*train=*/false);
  Eigen::MatrixXi codes(z_.T(), depth);
  rvq_.encode(z_.all(), depth, codes);
  return codes;
}

Eigen::MatrixXf Tokenizer::decode(const Eigen::MatrixXi& codes, int depth) {
  const int L = int(codes.rows());
  zq_.resize(1, cfg_.codebooks.dim, L);
  rvq_.decode(codes, depth, zq_.all());
  dec_.forward(zq_, y_, slab_, /*train=*/false);
  Eigen::MatrixXf out = (y_.mat(0).array().colwise() * stats_.std.array()).colwise() + stats_.mean.array();
  return out;
}

Eigen::MatrixXf Tokenizer::reconstruct(const Eigen::MatrixXf& log_mel, int depth) {
  return decode(encode(log_mel, depth), depth);
}

}  // namespace tessera::quant
