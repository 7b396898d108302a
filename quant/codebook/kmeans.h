// kmeans.h — k-means clustering (k-means++ seeding, Lloyd iterations) and the nearest-centre
// search it shares with the residual codebooks.
// D dims, N vectors, K centres. Layout: one vector per column of a column-major float
// matrix, so x is D x N and the centres are D x K; every vector is contiguous in memory.
#pragma once
#include <Eigen/Core>
#include <memory>
#include <random>

namespace tessera::quant {

// out[k] = ‖c_k‖² for the columns of c (D x K); out must hold K values.
void column_sq_norms(const Eigen::Ref<const Eigen::MatrixXf>& c, Eigen::Ref<Eigen::VectorXf> out);

// Nearest centre of each column by squared L2, ‖x‖² − 2·xᵀc + ‖c‖², the cross term as a
// matrix product (cᵀx, computed in cache-sized blocks; ‖x‖² is the same for every k and is
// left out of the argmin). Columns are split over a small persistent pool of threads. After the first call
// with a given K a call allocates nothing, Eigen's GEMM included (the products are cut small
// enough for Eigen to pack them on the stack). Not thread-safe: one caller at a time.
//   NearestSearch search(2);
//   search.run(c, c_sq, x, idx.data(), dist.data());
class NearestSearch {
 public:
  explicit NearestSearch(int threads = 1);  // 0 = std::thread::hardware_concurrency()
  ~NearestSearch();
  NearestSearch(NearestSearch&&) noexcept;
  NearestSearch& operator=(NearestSearch&&) noexcept;
  int threads() const;

  // c: D x K centres, c_sq: K cached ‖c_k‖², x: D x N.
  // idx[n] = argmin_k ‖x_n − c_k‖² (ties go to the lowest k) for n < N.
  // dist[n] (skipped if null) = ‖x_n − c_idx[n]‖², recomputed from the difference so that a
  // vector equal to its centre gets exactly 0.
  void run(const Eigen::Ref<const Eigen::MatrixXf>& c, const Eigen::Ref<const Eigen::VectorXf>& c_sq,
           const Eigen::Ref<const Eigen::MatrixXf>& x, int* idx, float* dist);

  struct Impl;

 private:
  std::unique_ptr<Impl> impl_;
};

struct KMeansOptions {
  int iters = 20;     // at most this many Lloyd iterations after seeding
  double tol = 1e-6;  // stop when the MSE falls by less than tol·MSE in an iteration
  int threads = 1;    // as NearestSearch
};

struct KMeansResult {
  Eigen::MatrixXf centres;  // D x K
  double mse = 0;           // mean over vectors of ‖x_n − c_assigned‖² (summed over D), last assignment
  int iters = 0;            // Lloyd iterations run
  int filled = 0;           // centres made by perturbation because fewer than K distinct vectors exist
  int reseeded = 0;         // empty clusters re-seeded from the farthest vector, over all iterations
};

// k-means++ seeding (Arthur & Vassilvitskii, "k-means++: the advantages of careful seeding",
// SODA 2007): the first centre uniform over the vectors, each next one drawn with probability
// ∝ D²(x), the squared distance to the nearest chosen centre. When every D² is zero (fewer
// distinct vectors than K, e.g. digital silence) the remaining centres are copies of the
// chosen ones plus a small Gaussian perturbation (1% of the data RMS, drawn from rng), so all
// K centres are distinct and finite. Throws tessera::Error if x has no columns or k < 1.
Eigen::MatrixXf kmeans_plus_plus(const Eigen::Ref<const Eigen::MatrixXf>& x, int k, std::mt19937_64& rng,
                                 int threads = 1, int* filled = nullptr);

// k-means: k-means++ seeding, then Lloyd iterations (Lloyd 1982) until the MSE stops falling or
// opts.iters is reached. An empty cluster takes the vector farthest from its centre; if every
// vector sits exactly on a centre, an empty (perturbed) centre is left where it is.
//   std::mt19937_64 rng(7);
//   KMeansResult r = kmeans(x, 1024, rng, {.iters = 20, .threads = 2});
KMeansResult kmeans(const Eigen::Ref<const Eigen::MatrixXf>& x, int k, std::mt19937_64& rng,
                    const KMeansOptions& opts = {});

}  // namespace tessera::quant
