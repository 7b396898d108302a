// kmeans_test.cpp — k-means (Lloyd–Max table, degenerate data, separated blobs) and the
// nearest-centre search (against a brute-force double search).
// D dims, N vectors, K centres; vectors are columns.
#include "quant/codebook/kmeans.h"

#include <doctest/doctest.h>

#include <cmath>
#include <numbers>
#include <random>
#include <set>
#include <vector>

#include "audio/error.h"

using tessera::quant::column_sq_norms;
using tessera::quant::kmeans;
using tessera::quant::kmeans_plus_plus;
using tessera::quant::KMeansOptions;
using tessera::quant::NearestSearch;

namespace {

Eigen::MatrixXf gaussian(int d, int n, std::uint64_t seed) {
  std::mt19937_64 rng(seed);
  std::normal_distribution<float> g(0.0f, 1.0f);
  Eigen::MatrixXf x(d, n);
  for (Eigen::Index i = 0; i < x.size(); ++i) x.data()[i] = g(rng);
  return x;
}

bool columns_distinct(const Eigen::MatrixXf& c) {
  std::set<std::vector<float>> seen;
  for (Eigen::Index k = 0; k < c.cols(); ++k)
    seen.insert(std::vector<float>(c.col(k).data(), c.col(k).data() + c.rows()));
  return Eigen::Index(seen.size()) == c.cols();
}

}  // namespace

TEST_CASE("1-D k-means on unit Gaussian data reaches the Lloyd-Max distortion") {
  // Max, "Quantizing for minimum distortion", IRE Trans. Inf. Theory 6(1), 1960, Table I:
  // minimum mean squared error of the optimum N-level quantizer of a unit normal variable
  // (values from memory): 2 levels 0.3634, 4 levels 0.1175, 8 levels 0.03454.
  const Eigen::MatrixXf x = gaussian(1, 200000, 1960);
  const struct {
    int k;
    double mse;
  } table[] = {{2, 0.3634}, {4, 0.1175}, {8, 0.03454}};
  for (const auto& row : table) {
    std::mt19937_64 rng(row.k);
    KMeansOptions opts;
    opts.iters = 300;
    opts.tol = 1e-7;
    opts.threads = 2;
    const auto res = kmeans(x, row.k, rng, opts);
    MESSAGE("K = " << row.k << ": mse " << res.mse << " (Max 1960: " << row.mse << "), " << res.iters
                   << " Lloyd iterations");
    CHECK(std::abs(res.mse - row.mse) <= 0.02 * row.mse);
    if (row.k == 2) {
      // Two levels: the centres are the half-normal means ±E|X| = ±sqrt(2/π) = ±0.7979
      // (closed form; Max 1960 lists 0.7980).
      const double lo = res.centres.minCoeff(), hi = res.centres.maxCoeff(), e = std::sqrt(2.0 / std::numbers::pi);
      CHECK(std::abs(lo + e) <= 0.01 * e);
      CHECK(std::abs(hi - e) <= 0.01 * e);
    }
  }
}

TEST_CASE("k-means on four separated blobs finds the blob centres") {
  // Worked example: clusters of radius ~0.01 at distance >= 10 apart; k-means++ draws with
  // probability ∝ D² (Arthur & Vassilvitskii 2007) and so seeds each blob once (all but surely).
  const float centre[4][2] = {{0, 0}, {10, 0}, {0, 10}, {10, 10}};
  Eigen::MatrixXf x = 0.01f * gaussian(2, 400, 4);
  for (int n = 0; n < 400; ++n) {
    x(0, n) += centre[n % 4][0];
    x(1, n) += centre[n % 4][1];
  }
  std::mt19937_64 rng(11);
  const auto res = kmeans(x, 4, rng);
  for (const auto& c : centre) {
    double best = 1e9;
    for (int k = 0; k < 4; ++k)
      best = std::min<double>(best, std::hypot(res.centres(0, k) - c[0], res.centres(1, k) - c[1]));
    CHECK(best <= 0.01);  // the mean of 100 points of spread 0.01 is within ~0.001
  }
  CHECK(res.mse <= 2 * 0.01 * 0.01 * 1.2);  // D·σ² within-blob variance, +20% sampling slack
}

TEST_CASE("k-means copes with 90% identical vectors and more centres than distinct vectors") {
  // Digital silence: 1800 zero vectors and 200 copies of 20 distinct vectors, K = 64 > 21.
  const int N = 2000, D = 8, K = 64;
  const Eigen::MatrixXf distinct = gaussian(D, 20, 90);
  Eigen::MatrixXf x = Eigen::MatrixXf::Zero(D, N);
  for (int n = 0; n < 200; ++n) x.col(10 * n) = distinct.col(n % 20);
  for (int threads : {1, 2}) {
    CAPTURE(threads);
    std::mt19937_64 rng(5);
    int filled = -1;
    const Eigen::MatrixXf seeds = kmeans_plus_plus(x, K, rng, threads, &filled);
    CHECK(filled == K - 21);  // every distinct vector was drawn before the weights ran out
    CHECK(seeds.allFinite());
    CHECK(columns_distinct(seeds));

    KMeansOptions opts;
    opts.threads = threads;
    const auto res = kmeans(x, K, rng, opts);
    CHECK(res.centres.allFinite());
    CHECK(columns_distinct(res.centres));
    // With a centre on every distinct vector the distortion is exactly 0 (definition).
    CHECK(res.mse == 0.0);
  }
  SUBCASE("all vectors identical") {
    std::mt19937_64 rng(6);
    const auto res = kmeans(Eigen::MatrixXf::Zero(D, 500), 16, rng);
    CHECK(res.filled == 15);
    CHECK(res.centres.allFinite());
    CHECK(columns_distinct(res.centres));
    CHECK(res.mse == 0.0);
  }
}

TEST_CASE("k-means rejects inputs it cannot cluster") {
  std::mt19937_64 rng(1);
  CHECK_THROWS_WITH_AS(kmeans(Eigen::MatrixXf(4, 0), 2, rng), "k-means needs at least one vector, got 0",
                       tessera::Error);
  CHECK_THROWS_WITH_AS(kmeans(Eigen::MatrixXf::Zero(4, 10), 0, rng), "k-means needs at least one centre, got k = 0",
                       tessera::Error);
  Eigen::MatrixXf bad = Eigen::MatrixXf::Zero(2, 3);
  bad(1, 2) = std::nanf("");
  CHECK_THROWS_WITH_AS(kmeans(bad, 2, rng), "k-means input holds non-finite values (nan or inf)", tessera::Error);
}

TEST_CASE("nearest-centre search equals a brute-force double search") {
  // Independent reference: a direct double-precision loop over ‖x − c‖². The float GEMM form
  // may pick another index only at a near-tie, so a pick must be within float rounding of the
  // true minimum, and almost all picks must be identical.
  const int D = 16, K = 200, N = 3000;
  const Eigen::MatrixXf c = gaussian(D, K, 21), x = gaussian(D, N, 22);
  Eigen::VectorXf c_sq(K);
  column_sq_norms(c, c_sq);
  for (int threads : {1, 2}) {
    CAPTURE(threads);
    NearestSearch search(threads);
    std::vector<int> idx(N);
    std::vector<float> dist(N);
    search.run(c, c_sq, x, idx.data(), dist.data());
    int same = 0;
    for (int n = 0; n < N; ++n) {
      double best = 1e300;
      int arg = -1;
      for (int k = 0; k < K; ++k) {
        const double d = (x.col(n).cast<double>() - c.col(k).cast<double>()).squaredNorm();
        if (d < best) {
          best = d;
          arg = k;
        }
      }
      same += idx[n] == arg;
      const double picked = (x.col(n).cast<double>() - c.col(idx[n]).cast<double>()).squaredNorm();
      CHECK(picked <= best + 1e-5 * best + 1e-6);
      CHECK(std::abs(dist[n] - picked) <= 1e-6 + 1e-5 * picked);
    }
    CHECK(same >= N - 3);
  }
}
