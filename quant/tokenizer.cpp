// tokenizer.cpp — model assembly and the inference paths.
#include "quant/tokenizer.h"

#include <algorithm>
#include <thread>

#include "audio/error.h"
#include "audio/log_mel.h"
#include "audio/chunked_synthesis.h"
#include "quant/checkpoint.h"

namespace tessera::quant {

int resolve_threads(int threads) {
  if (threads > 0) return threads;
  const unsigned hw = std::thread::hardware_concurrency();
  return hw ? int(hw) : 1;
}

namespace {
// The caller's thread count also runs the code search (a loaded model's stored
// train.threads, up to 1024, describes the machine it was trained on, not this one).
CodebookConfig searching_with(CodebookConfig c, int threads) {
  c.threads = threads;
  return c;
}
}  // namespace

Tokenizer::Tokenizer(const ExperimentConfig& cfg, int threads, int max_batch_vectors)
    : cfg_(cfg),
      pool_(resolve_threads(threads)),
      enc_(cfg.model, slab_, pool_),
      dec_(cfg.model, slab_, pool_),
      rvq_(searching_with(cfg.codebooks, pool_.size()), max_batch_vectors) {
  stats_.mean = Eigen::VectorXf::Zero(cfg.model.n_mels);
  stats_.std = Eigen::VectorXf::Ones(cfg.model.n_mels);
}

void Tokenizer::init(std::uint64_t seed) {
  std::mt19937_64 rng(seed);
  enc_.init(slab_, rng);
  dec_.init(slab_, rng);
}

std::unique_ptr<Tokenizer> Tokenizer::load(const std::string& path, int threads) { return load_model(path, threads); }

Eigen::MatrixXf Tokenizer::log_mel(const std::vector<float>& samples) const {
  return audio::log_mel(cfg_.audio, samples);
}

Eigen::MatrixXi Tokenizer::encode(const std::vector<float>& samples, int depth) {
  if (depth == 0) depth = stages();
  return encode(log_mel(samples), depth);
}

std::vector<float> Tokenizer::synthesize(const Eigen::MatrixXf& log_mel, int iters) const {
  audio::AudioConfig acfg = cfg_.audio;
  if (iters >= 0) acfg.griffin_lim_iters = iters;
  std::vector<float> out;
  audio::ChunkedSynthesis syn(acfg, [&](const float* x, std::size_t n) { out.insert(out.end(), x, x + n); });
  syn.push(log_mel);
  syn.finish();
  return out;
}

Eigen::MatrixXi Tokenizer::encode(const Eigen::MatrixXf& log_mel, int depth) {
  const int M = cfg_.model.n_mels;
  if (log_mel.rows() != M)
    throw Error("features have " + std::to_string(log_mel.rows()) + " mel bands; the model expects " +
                std::to_string(M));
  Eigen::MatrixXi codes(log_mel.cols() / hop(), std::max(depth, 0));
  Eigen::Index row = 0;
  ChunkedEncoder enc(*this, depth, ChunkedEncoder::append_to(codes, row));
  enc.push(log_mel);
  enc.finish();
  codes.conservativeResize(row, depth);
  return codes;
}

Eigen::MatrixXf Tokenizer::decode(const Eigen::MatrixXi& codes, int depth) {
  if (depth < 1 || depth > stages() || depth > codes.cols())
    throw Error("depth " + std::to_string(depth) + " is outside 1.." +
                std::to_string(std::min<Eigen::Index>(stages(), codes.cols())) + " (stages of the model and the codes)");
  Eigen::MatrixXf out(cfg_.model.n_mels, codes.rows() * hop());
  Eigen::Index col = 0;
  ChunkedDecoder dec(*this, depth, [&](const Eigen::Ref<const Eigen::MatrixXf>& y) {
    out.middleCols(col, y.cols()) = y;
    col += y.cols();
  });
  dec.push(codes);
  dec.finish();
  return out;
}

Eigen::MatrixXf Tokenizer::reconstruct(const Eigen::MatrixXf& log_mel, int depth) {
  return decode(encode(log_mel, depth), depth);
}

}  // namespace tessera::quant
