// work.cpp — set-up and timed loop of each benchmark piece.
#include "cli/bench/work.h"

#include <random>

#include "audio/log_mel.h"
#include "audio/mel_inverse.h"
#include "cli/bench/measure.h"
#include "quant/tokenizer.h"
#include "quant/train_step.h"

namespace tessera::bench {
namespace {

// The config with its search threads set to the benchmark's count.
quant::ExperimentConfig with_threads(quant::ExperimentConfig c, int threads) {
  c.codebooks.threads = threads;
  c.train.threads = threads;
  return c;
}

// Unit-variance features, as the peer's torch.randn input.
void fill_normal(float* p, std::size_t n, std::mt19937_64& rng) {
  std::normal_distribution<float> g;
  for (std::size_t i = 0; i < n; ++i) p[i] = g(rng);
}

}  // namespace

std::vector<double> time_train_steps(const quant::ExperimentConfig& cfg, int threads, int warmup, int repeats) {
  const quant::ExperimentConfig c = with_threads(cfg, threads);
  const int B = c.train.batch_size, M = c.model.n_mels, T = c.train.segment_frames;
  quant::Tokenizer tok(c, threads, B * T / c.model.hop());
  tok.init(1);
  std::mt19937_64 rng(3);
  quant::Tensor x(B, M, T), z;
  fill_normal(x.data(), x.size(), rng);
  // Codebooks start from the batch's own latents, as after the trainer's k-means start.
  tok.encoder().forward(x, z, tok.slab(), false);
  tok.codebooks().init_from(Eigen::MatrixXf(z.all()));
  quant::TrainStep step(tok, c.train);
  return time_ms(warmup, repeats, [&] { step.run(x, c.codebooks.stages, 1e-4); });
}

std::vector<double> time_encode(const quant::ExperimentConfig& cfg, int threads, int frames, int warmup, int repeats) {
  const quant::ExperimentConfig c = with_threads(cfg, threads);
  quant::Tokenizer tok(c, threads, frames / c.model.hop());
  tok.init(1);
  std::mt19937_64 rng(3);
  Eigen::MatrixXf mel(c.model.n_mels, frames);
  fill_normal(mel.data(), std::size_t(mel.size()), rng);
  Eigen::MatrixXi codes;
  return time_ms(warmup, repeats, [&] { codes = tok.encode(mel, c.codebooks.stages); });
}

std::vector<double> time_decode(const quant::ExperimentConfig& cfg, int threads, int frames, int warmup, int repeats) {
  const quant::ExperimentConfig c = with_threads(cfg, threads);
  quant::Tokenizer tok(c, threads, frames / c.model.hop());
  tok.init(1);
  std::mt19937_64 rng(3);
  Eigen::MatrixXi codes(frames / c.model.hop(), c.codebooks.stages);
  std::uniform_int_distribution<int> u(0, c.codebooks.codes - 1);
  for (Eigen::Index i = 0; i < codes.size(); ++i) codes.data()[i] = u(rng);
  Eigen::MatrixXf back;
  return time_ms(warmup, repeats, [&] { back = tok.decode(codes, c.codebooks.stages); });
}

std::vector<double> time_resynth(const audio::AudioConfig& cfg, const std::vector<float>& samples, int warmup,
                                 int repeats) {
  const Eigen::MatrixXf mel = audio::log_mel(cfg, samples);
  audio::MelInverter inverter(cfg);
  std::vector<float> y;
  return time_ms(warmup, repeats, [&] { y = inverter.invert(mel, samples.size()); });
}

}  // namespace tessera::bench
