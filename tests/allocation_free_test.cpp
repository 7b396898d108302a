// allocation_free_test.cpp — the hot loops allocate nothing once warm: a whole training
// step (encoder, codebooks, decoder, backward, clipping, Adam) at 1 and 2 threads, and
// encode/decode, whose allocations do not grow with the length of the input (only the
// result and a fixed set of per-call buffers are allocated, never per frame or chunk).
#include <doctest/doctest.h>

#include <random>

#include "count_allocations.h"
#include "quant/experiment_config.h"
#include "quant/tokenizer.h"
#include "quant/train_step.h"

using namespace tessera::quant;

#ifdef TESSERA_COUNTS_ALLOCATIONS
namespace {

// A reduced reference architecture: every layer kind, small enough for a unit test.
ExperimentConfig small(int threads) {
  ExperimentConfig c = load_experiment("", {"model.channels=32", "model.latent_dim=16", "codebooks.stages=4",
                                            "codebooks.codes=64", "train.batch_size=4", "train.segment_frames=80"});
  c.codebooks.threads = c.train.threads = threads;
  return c;
}

void fill_normal(float* p, std::size_t n, std::uint64_t seed) {
  std::mt19937_64 rng(seed);
  std::normal_distribution<float> g;
  for (std::size_t i = 0; i < n; ++i) p[i] = g(rng);
}

}  // namespace

TEST_CASE("a warmed-up training step allocates nothing, at 1 and 2 threads") {
  for (int threads : {1, 2}) {
    const ExperimentConfig c = small(threads);
    const int B = c.train.batch_size, M = c.model.n_mels, T = c.train.segment_frames;
    Tokenizer tok(c, threads, B * T / c.model.hop());
    tok.init(1);
    Tensor x(B, M, T), z;
    fill_normal(x.data(), x.size(), 3);
    tok.encoder().forward(x, z, tok.slab(), false);
    tok.codebooks().init_from(Eigen::MatrixXf(z.all()));
    TrainStep step(tok, c.train);
    for (int d = 1; d <= c.codebooks.stages; ++d) step.run(x, d, 1e-3);  // warm every depth
    const long n = tessera::testing::allocations_of([&] {
      for (int d = 1; d <= c.codebooks.stages; ++d) step.run(x, d, 1e-3);
    });
    INFO("threads " << threads);
    CHECK(n == 0);
  }
}

TEST_CASE("encode and decode allocate per call, not per frame or chunk") {
  const ExperimentConfig c = small(2);
  Tokenizer tok(c, 2);
  tok.init(1);
  auto allocations_for = [&](int frames) {
    Eigen::MatrixXf mel(c.model.n_mels, frames);
    fill_normal(mel.data(), std::size_t(mel.size()), 5);
    Eigen::MatrixXi codes = tok.encode(mel, c.codebooks.stages);
    Eigen::MatrixXf back = tok.decode(codes, c.codebooks.stages);  // warm both at this size
    const long enc = tessera::testing::allocations_of([&] { codes = tok.encode(mel, c.codebooks.stages); });
    const long dec = tessera::testing::allocations_of([&] { back = tok.decode(codes, c.codebooks.stages); });
    MESSAGE(frames << " frames: encode " << enc << ", decode " << dec << " allocations");
    return std::pair{enc, dec};
  };
  // 4 and 20 chunks of the chunk grid (quant/chunked_encoder.h) at the model's hop.
  const auto few = allocations_for(4 * 256 * c.model.hop()), many = allocations_for(20 * 256 * c.model.hop());
  CHECK(many.first == few.first);
  CHECK(many.second == few.second);
}
#endif
