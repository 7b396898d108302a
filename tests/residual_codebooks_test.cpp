// residual_codebooks_test.cpp — residual vector quantization: distortion bounds per depth,
// straight-through and commitment gradients, EMA update, dead-code restart, usage statistics,
// stage dropout, search against brute force, and no allocation per step.
// N vectors, D code dims, K codes per stage, S stages; latents are D x N (one vector per column).
#include "quant/codebook/residual_codebooks.h"

#include <doctest/doctest.h>

#include <algorithm>
#include <cmath>
#include <cstdlib>
#include <cstring>
#include <random>
#include <vector>

#include "audio/error.h"
#include "count_allocations.h"

using tessera::quant::CodebookConfig;
using tessera::quant::draw_depth;
using tessera::quant::ResidualCodebooks;
using tessera::quant::usage_of_codes;
using tessera::quant::UsageStats;
using Pass = ResidualCodebooks::Pass;

namespace {

Eigen::MatrixXf gaussian(int d, int n, std::uint64_t seed) {
  std::mt19937_64 rng(seed);
  std::normal_distribution<float> g(0.0f, 1.0f);
  Eigen::MatrixXf x(d, n);
  for (Eigen::Index i = 0; i < x.size(); ++i) x.data()[i] = g(rng);
  return x;
}

CodebookConfig small_config(int stages, int codes, int dim) {
  CodebookConfig cfg;
  cfg.stages = stages;
  cfg.codes = codes;
  cfg.dim = dim;
  cfg.threads = 1;
  cfg.seed = 3;
  return cfg;
}

// Mean squared error per dimension of decode(encode(z, depth)).
double mse_per_dim(ResidualCodebooks& rvq, const Eigen::MatrixXf& z, int depth) {
  Eigen::MatrixXi codes(z.cols(), depth);
  Eigen::MatrixXf zq(z.rows(), z.cols());
  rvq.encode(z, depth, codes);
  rvq.decode(codes, depth, zq);
  return (z - zq).cast<double>().squaredNorm() / double(z.size());
}

}  // namespace

TEST_CASE("a trained residual stack on Gaussian data: distortion falls with depth, above D(R)") {
  // 4-D unit Gaussian, K = 16 codes per stage: R = depth·log2(16)/4 = depth bits per dimension.
  // Shannon's distortion-rate function of a memoryless Gaussian source, D(R) = σ²·2^(−2R) per
  // dimension (Shannon 1959; Cover & Thomas, Elements of Information Theory, ch. 10), is a
  // lower bound for every quantizer at that rate, measured here on held-out data.
  CodebookConfig cfg = small_config(4, 16, 4);
  cfg.threads = 2;
  ResidualCodebooks rvq(cfg, 2048);
  const Eigen::MatrixXf train = gaussian(4, 16384, 100), held_out = gaussian(4, 16384, 101);
  rvq.init_from(train);
  Eigen::MatrixXf zq(4, 2048);
  for (int pass = 0; pass < 5; ++pass)
    for (int b = 0; b < 8; ++b) rvq.forward(train.middleCols(2048 * b, 2048), 4, zq, Pass::train);

  double previous = 1.0;  // depth 0: zq = 0, distortion σ² = 1
  for (int depth = 1; depth <= 4; ++depth) {
    const double mse = mse_per_dim(rvq, held_out, depth);
    const double bound = std::pow(2.0, -2.0 * depth);
    MESSAGE("depth " << depth << ": mse/dim " << mse << ", D(R) = " << bound);
    CHECK(mse <= previous);  // a residual stage never increases distortion (trained codebooks)
    CHECK(mse >= bound);
    previous = mse;
  }
  // 16 codes in 4-D include the product of four 2-level Lloyd-Max quantizers, whose distortion
  // is 0.3634 per dimension (Max 1960, Table I; value from memory): a trained stage must not be
  // worse (+3% for held-out sampling and a local optimum).
  CHECK(mse_per_dim(rvq, held_out, 1) <= 0.3634 * 1.03);
}

TEST_CASE("init_from subsamples, fills the restart pools and resets the EMA state") {
  CodebookConfig cfg = small_config(3, 16, 4);
  cfg.kmeans_init_vectors = 1000;
  cfg.restart_pool = 256;
  const Eigen::MatrixXf z = gaussian(4, 5000, 111);
  ResidualCodebooks a(cfg, 64), b(cfg, 64);
  a.init_from(z);
  const std::vector<Eigen::MatrixXf> batches = {z.leftCols(2000), z.rightCols(3000)};
  b.init_from(batches);
  // Same seed, same data side by side: the same codebooks.
  CHECK(std::equal(a.codebooks().begin(), a.codebooks().end(), b.codebooks().begin()));
  for (int s = 0; s < 3; ++s) {
    CHECK(a.restart_pool_state()[s] == 256);
    CHECK(a.stale_codes(s) == 0);
  }
  CHECK(std::all_of(a.ema_cluster_size().begin(), a.ema_cluster_size().end(), [](float v) { return v == 1.0f; }));
  CHECK(std::equal(a.codebooks().begin(), a.codebooks().end(), a.ema_embed_sum().begin()));
  // Every stage after the first quantises what is left, so its codes are smaller than stage 0's.
  CHECK(a.stage_codebook(1).norm() < a.stage_codebook(0).norm());
  CHECK_THROWS_WITH_AS(a.init_from(Eigen::MatrixXf(4, 0)),
                       "codebook initialisation needs at least one latent vector, got 0", tessera::Error);
}

TEST_CASE("straight-through: with beta = 0 the gradient at z is the gradient at zq, bit for bit") {
  CodebookConfig cfg = small_config(3, 8, 5);
  cfg.commitment = 0.0;
  ResidualCodebooks rvq(cfg, 64);
  const Eigen::MatrixXf z = gaussian(5, 40, 7), dzq = gaussian(5, 40, 8);
  Eigen::MatrixXf zq(5, 40), dz = Eigen::MatrixXf::Zero(5, 40);
  for (Pass pass : {Pass::eval, Pass::train}) {
    dz.setZero();
    rvq.forward(z, 3, zq, pass);
    rvq.backward(dzq, dz);
    CHECK(std::memcmp(dz.data(), dzq.data(), sizeof(float) * dz.size()) == 0);
  }
  // Accumulation (+=, the project's backward convention): a second call doubles it.
  rvq.backward(dzq, dz);
  CHECK((dz - 2 * dzq).cwiseAbs().maxCoeff() == 0.0f);
}

TEST_CASE("commitment gradient matches central finite differences") {
  // Central differences of the forward's commitment value with the codes held fixed (the loss
  // is quadratic in z inside one assignment cell, so the difference quotient is exact up to
  // rounding). Checks ∂commitment/∂z = (2β/(N·D))·Σ_s r_{s+1} derived in the header.
  CodebookConfig cfg = small_config(3, 4, 3);
  ResidualCodebooks rvq(cfg, 16);
  const int N = 6, D = 3;
  Eigen::MatrixXf z = gaussian(D, N, 31), zq(D, N), dz = Eigen::MatrixXf::Zero(D, N);
  const Eigen::MatrixXf zero = Eigen::MatrixXf::Zero(D, N);
  rvq.forward(z, 3, zq, Pass::eval);
  const Eigen::MatrixXi codes = rvq.last_codes();
  rvq.backward(zero, dz);  // dzq = 0 leaves only the commitment gradient
  const float h = 1e-2f;
  int checked = 0;
  for (int i = 0; i < N * D; ++i) {
    const float keep = z.data()[i];
    z.data()[i] = keep + h;
    const double up = rvq.forward(z, 3, zq, Pass::eval).commitment;
    const bool same_up = rvq.last_codes() == codes;
    z.data()[i] = keep - h;
    const double down = rvq.forward(z, 3, zq, Pass::eval).commitment;
    const bool same_down = rvq.last_codes() == codes;
    z.data()[i] = keep;
    if (!same_up || !same_down) continue;  // crossed a cell boundary: not differentiable there
    const double fd = (up - down) / (2.0 * h), an = dz.data()[i];
    CHECK(std::abs(fd - an) <= 1e-5 + 1e-3 * std::abs(an));
    ++checked;
  }
  CHECK(checked >= N * D * 8 / 10);
}

TEST_CASE("codebook-loss gradient matches central finite differences") {
  // Loss mode: ∂codebook/∂c_s,k = (2/(N·D))·(count·c − sum of its residuals), against central
  // differences of the forward's codebook value with the codes held fixed. The loss holds
  // sg(r_s), so stage s is checked in a forward of depth s + 1: there r_s does not depend on
  // c_s and nothing after stage s does either.
  CodebookConfig cfg = small_config(2, 4, 3);
  cfg.learning = CodebookConfig::Learning::loss;
  ResidualCodebooks rvq(cfg, 16);
  const int N = 10, D = 3, K = 4;
  const Eigen::MatrixXf z = gaussian(D, N, 41), zero = Eigen::MatrixXf::Zero(D, N);
  Eigen::MatrixXf zq(D, N), dz = Eigen::MatrixXf::Zero(D, N);
  for (int s = 0; s < 2; ++s) {
    CAPTURE(s);
    rvq.zero_grad();
    rvq.forward(z, s + 1, zq, Pass::eval);
    const Eigen::MatrixXi codes = rvq.last_codes();
    rvq.backward(zero, dz, 1.0f, 1.0f);
    const std::vector<float> grad(rvq.codebook_grads().begin(), rvq.codebook_grads().end());
    const float h = 1e-2f;
    int checked = 0, nonzero = 0;
    for (int i = s * K * D; i < (s + 1) * K * D; ++i) {
      const float keep = rvq.codebooks()[i];
      rvq.codebooks()[i] = keep + h;
      const double up = rvq.forward(z, s + 1, zq, Pass::eval).codebook;
      const bool same_up = rvq.last_codes() == codes;
      rvq.codebooks()[i] = keep - h;
      const double down = rvq.forward(z, s + 1, zq, Pass::eval).codebook;
      const bool same_down = rvq.last_codes() == codes;
      rvq.codebooks()[i] = keep;
      if (!same_up || !same_down) continue;
      const double fd = (up - down) / (2.0 * h);
      CHECK(std::abs(fd - grad[i]) <= 1e-5 + 1e-3 * std::abs(grad[i]));
      ++checked;
      nonzero += grad[i] != 0.0f;
    }
    CHECK(checked >= K * D * 8 / 10);
    CHECK(nonzero > 0);
  }
}

TEST_CASE("encode picks the nearest code of each residual (brute force) and decode sums them") {
  // Reference: a direct double-precision residual search. Float rounding may flip a near-tie,
  // so each pick must be within rounding of the true minimum along the library's own path.
  CodebookConfig cfg = small_config(3, 32, 8);
  cfg.threads = 2;
  ResidualCodebooks rvq(cfg, 64);  // smaller than N: the scratch grows once
  const int N = 500, D = 8, K = 32;
  const Eigen::MatrixXf z = gaussian(D, N, 51);
  Eigen::MatrixXi codes(N, 3);
  rvq.encode(z, 3, codes);
  int same = 0;
  for (int n = 0; n < N; ++n) {
    Eigen::VectorXd r = z.col(n).cast<double>();
    for (int s = 0; s < 3; ++s) {
      const auto c = rvq.stage_codebook(s).cast<double>();
      double best = 1e300;
      int arg = -1;
      for (int k = 0; k < K; ++k)
        if ((r - c.col(k)).squaredNorm() < best) best = (r - c.col(k)).squaredNorm(), arg = k;
      const double picked = (r - c.col(codes(n, s))).squaredNorm();
      CHECK(picked <= best + 1e-5 * best + 1e-6);
      same += arg == codes(n, s);
      r -= c.col(codes(n, s));
    }
  }
  CHECK(same >= 3 * N - 3);

  // decode(encode(z)) is the forward's zq bit for bit, and the forward found the same codes.
  for (int depth = 1; depth <= 3; ++depth) {
    Eigen::MatrixXi c(N, depth);
    Eigen::MatrixXf from_codes(D, N), zq(D, N);
    rvq.encode(z, depth, c);
    CHECK(c == codes.leftCols(depth));  // a prefix of the full-depth codes
    rvq.decode(c, depth, from_codes);
    rvq.forward(z, depth, zq, Pass::eval);
    CHECK(rvq.last_codes() == c);
    CHECK(std::memcmp(from_codes.data(), zq.data(), sizeof(float) * zq.size()) == 0);
    // Decoding the first `depth` columns of a deeper code matrix gives the same.
    rvq.decode(codes, depth, from_codes);
    CHECK(from_codes == zq);
  }
}

TEST_CASE("EMA update matches a hand computation of the reference formula") {
  // torch_reference.py, ResidualVQ.ema_update, with γ = 0.5 and ε = 0.1:
  //   codes c0 = (0, 0), c1 = (10, 10); cluster_size = (1, 1); embed_sum = codebook.
  //   z = (1, 2), (−1, 0) → c0;  (9, 11) → c1.  counts = (2, 1); sums = (0, 2), (9, 11).
  //   cluster_size = 0.5·1 + 0.5·(2, 1) = (1.5, 1.0);  n = 2.5
  //   embed_sum0 = 0.5·(0, 0) + 0.5·(0, 2) = (0, 1);  embed_sum1 = 0.5·(10, 10) + 0.5·(9, 11) = (9.5, 10.5)
  //   smoothed = (cs + 0.1)/(2.5 + 2·0.1)·2.5 = (1.481481, 1.018519)
  //   c0 = (0, 0.675);  c1 = (9.327273, 10.309091)
  //   commitment = 0.25·mean‖r − q‖² = 0.25·(5 + 1 + 2)/6 = 0.333333
  CodebookConfig cfg = small_config(1, 2, 2);
  cfg.ema_decay = 0.5;
  cfg.ema_epsilon = 0.1;
  cfg.dead_after_steps = 0;
  ResidualCodebooks rvq(cfg, 4);
  const float init[] = {0, 0, 10, 10};
  std::copy(init, init + 4, rvq.codebooks().begin());
  rvq.reset_ema();
  Eigen::MatrixXf z(2, 3), zq(2, 3);
  z << 1, -1, 9, 2, 0, 11;
  const auto losses = rvq.forward(z, 1, zq, Pass::train);
  const double s0 = 1.6 / 2.7 * 2.5, s1 = 1.1 / 2.7 * 2.5;
  const double want_c[] = {0, 1 / s0, 9.5 / s1, 10.5 / s1};
  const double want_cs[] = {1.5, 1.0}, want_es[] = {0, 1, 9.5, 10.5};
  for (int i = 0; i < 4; ++i) {
    CHECK(std::abs(rvq.codebooks()[i] - want_c[i]) <= 1e-6 + 1e-6 * std::abs(want_c[i]));
    CHECK(std::abs(rvq.ema_embed_sum()[i] - want_es[i]) <= 1e-6 + 1e-6 * std::abs(want_es[i]));
  }
  for (int k = 0; k < 2; ++k) CHECK(std::abs(rvq.ema_cluster_size()[k] - want_cs[k]) <= 1e-6);
  CHECK(std::abs(losses.commitment - 0.25 * 8.0 / 6.0) <= 1e-7);
  CHECK(std::abs(losses.codebook - 8.0 / 6.0) <= 1e-7);
  // The forward itself used the codes before the update (as the reference's index_select copy).
  CHECK(zq(0, 2) == 10.0f);
}

TEST_CASE("dead-code restart revives a code unused for M steps") {
  CodebookConfig cfg = small_config(2, 4, 2);
  cfg.dead_after_steps = 3;
  cfg.restart_pool = 16;
  cfg.restart_pool_per_step = 4;
  ResidualCodebooks rvq(cfg, 16);
  // Stage 0: three codes on three clusters of the data, code 3 far away and never nearest.
  const float init[] = {1, 0, -1, 0, 0, 1, 50, 50};
  std::copy(init, init + 8, rvq.codebooks().begin());
  rvq.reset_ema();
  Eigen::MatrixXf z = 0.1f * gaussian(2, 12, 61);
  for (int n = 0; n < 12; ++n) {
    z(0, n) += init[2 * (n % 3)];
    z(1, n) += init[2 * (n % 3) + 1];
  }
  Eigen::MatrixXf zq(2, 12);
  const std::vector<std::int32_t> since_stage1(rvq.steps_since_used().begin() + 4, rvq.steps_since_used().end());
  for (int step = 1; step <= 2; ++step) {
    rvq.forward(z, 1, zq, Pass::train);
    CHECK(rvq.steps_since_used()[3] == step);
  }
  CHECK(rvq.stale_codes(0) == 0);
  // Stage 1 did not run at depth 1, so its counters did not move.
  CHECK(std::equal(since_stage1.begin(), since_stage1.end(), rvq.steps_since_used().begin() + 4));
  rvq.forward(z, 1, zq, Pass::train);  // third unused step: restart
  CHECK(rvq.restarts(0) == 1);
  CHECK(rvq.steps_since_used()[3] == 0);
  CHECK(rvq.ema_cluster_size()[3] == 1.0f);
  const float c3[] = {rvq.codebooks()[6], rvq.codebooks()[7]};
  CHECK(rvq.ema_embed_sum()[6] == c3[0]);
  CHECK(rvq.ema_embed_sum()[7] == c3[1]);
  bool from_data = false;  // stage 0's residual is z itself
  for (int n = 0; n < 12; ++n) from_data |= z(0, n) == c3[0] && z(1, n) == c3[1];
  CHECK(from_data);
  rvq.reset_usage();
  rvq.forward(z, 1, zq, Pass::train);
  CHECK(rvq.usage().counts(0)[3] > 0);  // the vector it was taken from now maps to it
}

TEST_CASE("usage statistics: perplexity and entropy of known code distributions") {
  // Perplexity exp(H) is K for uniform use of K codes and 1 for a single code (definition);
  // p = (1/2, 1/4, 1/4) has H = −Σ p·log2 p = 1.5 bits (Shannon's entropy, by hand).
  const int K = 64;
  Eigen::MatrixXi codes(K * 10, 3);
  for (int n = 0; n < K * 10; ++n) {
    codes(n, 0) = n % K;
    codes(n, 1) = 5;
    codes(n, 2) = n % 4 < 2 ? 0 : (n % 4 == 2 ? 1 : 2);
  }
  const auto u = usage_of_codes(codes, K);
  CHECK(std::abs(u[0].perplexity - K) <= 1e-9 * K);
  CHECK(std::abs(u[0].entropy_bits - 6.0) <= 1e-12);
  CHECK(u[0].used == K);
  CHECK(u[0].unused == 0);
  CHECK(u[1].perplexity == 1.0);
  CHECK(u[1].entropy_bits == 0.0);
  CHECK(u[1].used == 1);
  CHECK(u[1].unused == K - 1);
  CHECK(std::abs(u[2].entropy_bits - 1.5) <= 1e-12);
  CHECK(std::abs(u[2].perplexity - std::pow(2.0, 1.5)) <= 1e-12);

  UsageStats stats(2, K);
  CHECK(stats.stage(0).vectors == 0);
  CHECK(stats.stage(0).perplexity == 0.0);
  stats.add_codes(codes.leftCols(2));
  CHECK(stats.stage(0).vectors == K * 10);
  stats.reset();
  CHECK(stats.stage(0).used == 0);
  Eigen::MatrixXi bad = codes.leftCols(1);
  bad(3, 0) = K;
  CHECK_THROWS_WITH_AS(stats.add_codes(bad), "code 64 at stage 0 is outside 0..63", tessera::Error);
  CHECK(stats.stage(0).vectors == 0);  // nothing half-counted
}

TEST_CASE("stage dropout draws depths with the configured probabilities") {
  // uniform: P(d) = 1/S; full_or_uniform: P(S) = p + (1 − p)/S, P(d < S) = (1 − p)/S (a mixture).
  // Tolerance: 5 binomial standard deviations.
  CodebookConfig cfg;
  cfg.stages = 8;
  const int draws = 200000;
  for (auto schedule : {CodebookConfig::DepthSchedule::uniform, CodebookConfig::DepthSchedule::full_or_uniform}) {
    cfg.schedule = schedule;
    const double p = schedule == CodebookConfig::DepthSchedule::uniform ? 0.0 : cfg.p_full;
    std::mt19937_64 rng(71);
    std::vector<int> hist(cfg.stages + 1, 0);
    for (int i = 0; i < draws; ++i) ++hist[draw_depth(cfg, rng)];
    CHECK(hist[0] == 0);
    for (int d = 1; d <= cfg.stages; ++d) {
      const double want = (1 - p) / cfg.stages + (d == cfg.stages ? p : 0.0);
      const double sd = std::sqrt(want * (1 - want) / draws);
      CHECK(std::abs(hist[d] / double(draws) - want) <= 5 * sd);
    }
  }
}

TEST_CASE("errors a user can cause name the bad value") {
  CodebookConfig cfg = small_config(3, 8, 4);
  ResidualCodebooks rvq(cfg, 8);
  Eigen::MatrixXf z = gaussian(4, 5, 1), zq(4, 5), wrong = gaussian(3, 5, 1);
  Eigen::MatrixXi codes(5, 3);
  CHECK_THROWS_WITH_AS(rvq.encode(z, 0, codes.leftCols(0)), "depth 0 is outside 1..3", tessera::Error);
  CHECK_THROWS_WITH_AS(rvq.forward(z, 4, zq, Pass::train), "depth 4 is outside 1..3", tessera::Error);
  CHECK_THROWS_WITH_AS(rvq.encode(wrong, 1, codes.leftCols(1)), "latent has 3 dims, the codebooks expect 4",
                       tessera::Error);
  codes.setZero();
  codes(2, 1) = 8;
  CHECK_THROWS_WITH_AS(rvq.decode(codes, 2, zq), "code 8 at stage 1 is outside 0..7", tessera::Error);
  cfg.codes = 0;
  CHECK_THROWS_WITH_AS(ResidualCodebooks{cfg}, "codebooks: codes must be in 1..32768, got 0", tessera::Error);
  cfg = small_config(3, 8, 4);
  cfg.p_full = 1.5;
  CHECK_THROWS_WITH_AS(tessera::quant::validate(cfg), "codebooks: p_full must be in [0, 1], got 1.5",
                       tessera::Error);
}

#ifdef TESSERA_COUNTS_ALLOCATIONS
TEST_CASE("a warmed-up codebook training step allocates nothing") {
  // The reference size (8 x 1024 x 128), a batch of 400 vectors, two search threads.
  for (auto learning : {CodebookConfig::Learning::ema, CodebookConfig::Learning::loss}) {
    CodebookConfig cfg;
    cfg.learning = learning;
    cfg.threads = 2;
    cfg.dead_after_steps = 1;  // restarts on every step: their path must not allocate either
    ResidualCodebooks rvq(cfg, 400);
    const Eigen::MatrixXf z = gaussian(128, 400, 81), dzq = gaussian(128, 400, 82);
    Eigen::MatrixXf zq(128, 400), dz(128, 400);
    Eigen::MatrixXi codes(400, 8);
    std::mt19937_64 rng(9);
    auto step = [&] {
      dz.setZero();
      rvq.forward(z, draw_depth(cfg, rng), zq, Pass::train);
      rvq.backward(dzq, dz);
      rvq.encode(z, 8, codes);
    };
    step();
    CHECK(tessera::testing::allocations_of([&] {
            for (int i = 0; i < 3; ++i) step();
          }) == 0);
    CHECK(rvq.restarts(0) > 0);
  }
}
#endif
