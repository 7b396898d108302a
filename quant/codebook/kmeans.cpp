// kmeans.cpp — k-means++ seeding, Lloyd iterations and the chunked-GEMM nearest-centre search.
// D dims, N vectors, K centres; vectors are columns (x: D x N, centres: D x K).
#include "quant/codebook/kmeans.h"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <condition_variable>
#include <limits>
#include <mutex>
#include <string>
#include <thread>
#include <vector>

#include "audio/error.h"

namespace tessera::quant {
namespace {

// Below this many multiply-adds (N·K·D) a search runs on the calling thread only: waking the
// workers costs tens of microseconds.
constexpr double kParallelWork = 1 << 21;

// A fixed set of threads that run parts 1..P-1 of a job while the caller runs part 0.
// Jobs are a function pointer plus context, so dispatch allocates nothing.
class WorkerPool {
 public:
  explicit WorkerPool(int threads) {
    for (int id = 1; id < threads; ++id) workers_.emplace_back([this, id] { loop(id); });
  }
  ~WorkerPool() {
    {
      std::lock_guard lk(m_);
      stop_ = true;
    }
    start_.notify_all();
    for (auto& t : workers_) t.join();
  }
  WorkerPool(const WorkerPool&) = delete;
  WorkerPool& operator=(const WorkerPool&) = delete;

  int size() const { return int(workers_.size()) + 1; }

  // Calls f(part) for part in [0, parts), parts <= size(); returns when all are done.
  template <class F>
  void run(int parts, F& f) {
    assert(parts >= 1 && parts <= size());
    if (parts == 1) {
      f(0);
      return;
    }
    {
      std::lock_guard lk(m_);
      fn_ = [](void* ctx, int part) { (*static_cast<F*>(ctx))(part); };
      ctx_ = &f;
      parts_ = parts;
      pending_ = parts - 1;
      ++generation_;
    }
    start_.notify_all();
    f(0);
    std::unique_lock lk(m_);
    done_.wait(lk, [this] { return pending_ == 0; });
  }

 private:
  void loop(int id) {
    std::uint64_t seen = 0;
    for (;;) {
      void (*fn)(void*, int);
      void* ctx;
      int parts;
      {
        std::unique_lock lk(m_);
        start_.wait(lk, [&] { return stop_ || generation_ != seen; });
        if (stop_) return;
        seen = generation_;
        fn = fn_;
        ctx = ctx_;
        parts = parts_;
      }
      if (id >= parts) continue;
      fn(ctx, id);
      std::lock_guard lk(m_);
      if (--pending_ == 0) done_.notify_one();
    }
  }

  std::vector<std::thread> workers_;
  std::mutex m_;
  std::condition_variable start_, done_;
  void (*fn_)(void*, int) = nullptr;
  void* ctx_ = nullptr;
  int parts_ = 1;
  int pending_ = 0;
  std::uint64_t generation_ = 0;
  bool stop_ = false;
};

int resolve_threads(int threads) {
  if (threads > 0) return threads;
  return std::max(1u, std::thread::hardware_concurrency());
}

// Eigen's GEMM packs its operands into blocks of at most (codes · D) and (columns · D)
// floats and puts them on the stack up to EIGEN_STACK_ALLOCATION_LIMIT (128 KB), on the heap
// above. Products of at most 32768 / D codes by 32768 / D columns therefore allocate nothing.
constexpr int kPackFloats = 32768;
int code_block(int d) { return std::max(1, kPackFloats / d); }
// Columns per chunk: the K x chunk score block stays near 256 KB (inside L2), and within the
// packing limit above.
int chunk_columns(int k, int d) { return std::min(std::clamp(65536 / std::max(k, 1), 16, 4096), code_block(d)); }

// Index of the smallest csq[k] − 2·s[k], the lowest k on ties (0 if they are all NaN): a
// vectorised minimum, then a scan for its first occurrence (2·s is exact, so both passes
// compute bit-identical values).
int argmin_scores(const float* csq, const float* s, int K) {
  const Eigen::Map<const Eigen::ArrayXf> c(csq, K), x(s, K);
  const float best = (c - 2.0f * x).minCoeff();
  for (int k = 0; k < K; ++k)
    if (csq[k] - 2.0f * s[k] == best) return k;
  return 0;
}

void validate_input(const Eigen::Ref<const Eigen::MatrixXf>& x, int k) {
  if (x.cols() == 0) throw Error("k-means needs at least one vector, got 0");
  if (x.rows() == 0) throw Error("k-means needs vectors of at least one dimension, got 0");
  if (k < 1) throw Error("k-means needs at least one centre, got k = " + std::to_string(k));
  if (!x.allFinite()) throw Error("k-means input holds non-finite values (nan or inf)");
}

// Size of the perturbations that make extra centres distinct: 1% of the data RMS (1 if zero).
double perturbation_scale(const Eigen::Ref<const Eigen::MatrixXf>& x) {
  const double ms = x.cast<double>().squaredNorm() / double(x.size());
  return 0.01 * (ms > 0 ? std::sqrt(ms) : 1.0);
}

void perturb(Eigen::Ref<Eigen::VectorXf> c, double scale, std::mt19937_64& rng) {
  std::normal_distribution<double> gauss(0.0, scale);
  for (Eigen::Index d = 0; d < c.size(); ++d) c[d] += float(gauss(rng));
}

}  // namespace

struct NearestSearch::Impl {
  explicit Impl(int threads) : pool(threads), scratch(pool.size()) {}
  WorkerPool pool;
  std::vector<Eigen::MatrixXf> scratch;  // per part: K x chunk scores
};

void column_sq_norms(const Eigen::Ref<const Eigen::MatrixXf>& c, Eigen::Ref<Eigen::VectorXf> out) {
  assert(out.size() == c.cols());
  out = c.colwise().squaredNorm().transpose();
}

NearestSearch::NearestSearch(int threads) : impl_(std::make_unique<Impl>(resolve_threads(threads))) {}
NearestSearch::~NearestSearch() = default;
NearestSearch::NearestSearch(NearestSearch&&) noexcept = default;
NearestSearch& NearestSearch::operator=(NearestSearch&&) noexcept = default;
int NearestSearch::threads() const { return impl_->pool.size(); }

void NearestSearch::run(const Eigen::Ref<const Eigen::MatrixXf>& c, const Eigen::Ref<const Eigen::VectorXf>& c_sq,
                        const Eigen::Ref<const Eigen::MatrixXf>& x, int* idx, float* dist) {
  const int K = int(c.cols()), N = int(x.cols()), D = int(x.rows());
  assert(c.rows() == x.rows() && c_sq.size() == K && K > 0);
  if (N == 0) return;
  const int chunk = chunk_columns(K, D), codes_per_gemm = code_block(D);
  int parts = impl_->pool.size();
  if (double(N) * K * D < kParallelWork) parts = 1;
  parts = std::min(parts, (N + 15) / 16);
  for (int p = 0; p < parts; ++p) {
    auto& s = impl_->scratch[p];
    if (s.rows() != K || s.cols() != chunk) s.resize(K, chunk);
  }
  auto body = [&](int part) {
    const int begin = int(std::int64_t(N) * part / parts), end = int(std::int64_t(N) * (part + 1) / parts);
    Eigen::MatrixXf& scores = impl_->scratch[part];
    const float* csq = c_sq.data();
    for (int j0 = begin; j0 < end; j0 += chunk) {
      const int len = std::min(chunk, end - j0);
      auto s = scores.leftCols(len);
      for (int k0 = 0; k0 < K; k0 += codes_per_gemm) {  // K x len cross terms xᵀc
        const int m = std::min(codes_per_gemm, K - k0);
        s.middleRows(k0, m).noalias() = c.middleCols(k0, m).transpose() * x.middleCols(j0, len);
      }
      for (int j = 0; j < len; ++j) {
        const int arg = argmin_scores(csq, s.col(j).data(), K);
        idx[j0 + j] = arg;
        if (dist) dist[j0 + j] = (x.col(j0 + j) - c.col(arg)).squaredNorm();
      }
    }
  };
  impl_->pool.run(parts, body);
}

namespace {

// k-means++ on a given pool. Returns the centres; *filled = how many came from perturbation.
Eigen::MatrixXf seed(const Eigen::Ref<const Eigen::MatrixXf>& x, int k, std::mt19937_64& rng, WorkerPool& pool,
                     int* filled) {
  const int N = int(x.cols()), D = int(x.rows());
  Eigen::MatrixXf centres(D, k);
  std::vector<float> d2(N, std::numeric_limits<float>::infinity());  // D²(x_n)
  int parts = pool.size();
  if (double(N) * D < kParallelWork / 8) parts = 1;
  parts = std::min(parts, N);
  std::vector<double> partial(parts);
  auto range = [&](int part, int& begin, int& end) {
    begin = int(std::int64_t(N) * part / parts);
    end = int(std::int64_t(N) * (part + 1) / parts);
  };
  int chosen = 0;
  // Lowers D² by the newest centre; exact differences keep D² of a copy of a centre at 0.
  auto update = [&](int part) {
    int begin, end;
    range(part, begin, end);
    const auto c = centres.col(chosen - 1);
    double sum = 0;
    for (int n = begin; n < end; ++n) {
      const float v = (x.col(n) - c).squaredNorm();
      if (v < d2[n]) d2[n] = v;
      sum += d2[n];
    }
    partial[part] = sum;
  };

  centres.col(chosen++) = x.col(std::uniform_int_distribution<int>(0, N - 1)(rng));
  pool.run(parts, update);
  while (chosen < k) {
    double total = 0;
    for (double p : partial) total += p;
    if (!(total > 0)) break;  // every vector sits on a centre: fewer than k distinct vectors
    double u = std::uniform_real_distribution<double>(0.0, total)(rng);
    int pick = -1, last_positive = -1;
    for (int part = 0; part < parts && pick < 0; ++part) {
      if (partial[part] <= 0) continue;
      int begin, end;
      range(part, begin, end);
      if (u >= partial[part] && part + 1 < parts) {
        u -= partial[part];
        for (int n = end - 1; n >= begin; --n)
          if (d2[n] > 0) {
            last_positive = n;
            break;
          }
        continue;
      }
      double cum = 0;
      for (int n = begin; n < end; ++n) {
        if (d2[n] <= 0) continue;
        last_positive = n;
        cum += d2[n];
        if (cum > u) {
          pick = n;
          break;
        }
      }
    }
    if (pick < 0) pick = last_positive;  // rounding left u past the end
    assert(pick >= 0);
    centres.col(chosen++) = x.col(pick);
    pool.run(parts, update);
  }
  const int distinct = chosen;
  if (chosen < k) {
    const double scale = perturbation_scale(x);
    for (; chosen < k; ++chosen) {
      centres.col(chosen) = centres.col((chosen - distinct) % distinct);
      perturb(centres.col(chosen), scale, rng);
    }
  }
  if (filled) *filled = k - distinct;
  return centres;
}

}  // namespace

Eigen::MatrixXf kmeans_plus_plus(const Eigen::Ref<const Eigen::MatrixXf>& x, int k, std::mt19937_64& rng, int threads,
                                 int* filled) {
  validate_input(x, k);
  WorkerPool pool(resolve_threads(threads));
  return seed(x, k, rng, pool, filled);
}

KMeansResult kmeans(const Eigen::Ref<const Eigen::MatrixXf>& x, int k, std::mt19937_64& rng,
                    const KMeansOptions& opts) {
  validate_input(x, k);
  const int N = int(x.cols()), D = int(x.rows());
  KMeansResult res;
  {
    WorkerPool pool(resolve_threads(opts.threads));
    res.centres = seed(x, k, rng, pool, &res.filled);
  }
  NearestSearch search(opts.threads);
  Eigen::MatrixXf& c = res.centres;
  Eigen::VectorXf c_sq(k);
  std::vector<int> idx(N), prev(N, -1);
  std::vector<float> dist(N);
  Eigen::MatrixXd sums(D, k);
  std::vector<std::int64_t> counts(k);
  const double scale = perturbation_scale(x);
  double prev_mse = std::numeric_limits<double>::infinity();

  for (int it = 0;; ++it) {
    column_sq_norms(c, c_sq);
    search.run(c, c_sq, x, idx.data(), dist.data());
    double total = 0;
    for (float v : dist) total += v;
    res.mse = total / N;
    const bool unchanged = idx == prev;
    if (it >= opts.iters || unchanged || (it > 0 && prev_mse - res.mse <= opts.tol * prev_mse)) break;
    prev_mse = res.mse;
    prev = idx;

    // Update: each centre moves to the mean of its vectors (Lloyd 1982).
    sums.setZero();
    std::fill(counts.begin(), counts.end(), 0);
    for (int n = 0; n < N; ++n) {
      sums.col(idx[n]) += x.col(n).cast<double>();
      ++counts[idx[n]];
    }
    for (int j = 0; j < k; ++j)
      if (counts[j] > 0) c.col(j) = (sums.col(j) / double(counts[j])).cast<float>();
    // Empty clusters take the vector farthest from its centre, farthest-first: after each
    // pick the distances are lowered by the new centre, so copies of it are not picked again.
    for (int j = 0; j < k; ++j) {
      if (counts[j] > 0) continue;
      const int far = int(std::max_element(dist.begin(), dist.end()) - dist.begin());
      if (dist[far] > 0) {
        c.col(j) = x.col(far);
        for (int n = 0; n < N; ++n) dist[n] = std::min(dist[n], (x.col(n) - c.col(j)).squaredNorm());
        ++res.reseeded;
      } else {
        perturb(c.col(j), scale, rng);  // nothing left to take: keep it distinct and harmless
      }
    }
    res.iters = it + 1;
  }
  return res;
}

}  // namespace tessera::quant
