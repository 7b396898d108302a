// residual_codebooks.cpp — residual vector quantization: search, straight-through forward and
// backward, EMA / loss learning, k-means++ initialisation, dead-code restart, stage dropout.
// N vectors, D code dims, K codes per stage, S stages, P restart-pool size.
#include "quant/codebook/residual_codebooks.h"

#include <algorithm>
#include <cassert>
#include <climits>
#include <cstdio>
#include <numeric>
#include <string>

#include "audio/error.h"

namespace tessera::quant {
namespace {

[[noreturn]] void bad(const std::string& what) { throw Error("codebooks: " + what); }

std::string num(int v) { return std::to_string(v); }
std::string num(double v) {
  char buf[32];
  std::snprintf(buf, sizeof buf, "%g", v);
  return buf;
}

}  // namespace

void validate(const CodebookConfig& c) {
  auto s = [](auto v) { return num(v); };
  if (c.stages < 1) bad("stages must be at least 1, got " + s(c.stages));
  // Token files store int16 codes, so K <= 32768.
  if (c.codes < 1 || c.codes > 32768) bad("codes must be in 1..32768, got " + s(c.codes));
  if (c.dim < 1) bad("dim must be at least 1, got " + s(c.dim));
  if (!(c.commitment >= 0)) bad("commitment must be >= 0, got " + s(c.commitment));
  if (!(c.ema_decay >= 0 && c.ema_decay < 1)) bad("ema_decay must be in [0, 1), got " + s(c.ema_decay));
  if (!(c.ema_epsilon > 0)) bad("ema_epsilon must be > 0, got " + s(c.ema_epsilon));
  if (c.kmeans_init_batches < 1) bad("kmeans_init_batches must be at least 1, got " + s(c.kmeans_init_batches));
  if (c.kmeans_init_vectors < 1) bad("kmeans_init_vectors must be at least 1, got " + s(c.kmeans_init_vectors));
  if (c.kmeans_iters < 0) bad("kmeans_iters must be >= 0, got " + s(c.kmeans_iters));
  if (c.dead_after_steps < 0) bad("dead_after_steps must be >= 0, got " + s(c.dead_after_steps));
  if (c.restart_pool < 1) bad("restart_pool must be at least 1, got " + s(c.restart_pool));
  if (c.restart_pool_per_step < 0) bad("restart_pool_per_step must be >= 0, got " + s(c.restart_pool_per_step));
  if (!(c.p_full >= 0 && c.p_full <= 1)) bad("p_full must be in [0, 1], got " + s(c.p_full));
  if (c.threads < 0) bad("threads must be >= 0, got " + s(c.threads));
}

int draw_depth(const CodebookConfig& cfg, std::mt19937_64& rng) {
  if (cfg.schedule == CodebookConfig::DepthSchedule::full_or_uniform &&
      std::bernoulli_distribution(cfg.p_full)(rng))
    return cfg.stages;
  return std::uniform_int_distribution<int>(1, cfg.stages)(rng);
}

ResidualCodebooks::ResidualCodebooks(const CodebookConfig& cfg, int max_vectors)
    : cfg_((validate(cfg), cfg)), rng_(cfg.seed), search_(cfg.threads) {
  const std::size_t S = cfg_.stages, K = cfg_.codes, D = cfg_.dim;
  codebook_.resize(S * K * D);
  std::normal_distribution<float> gauss(0.0f, 1.0f);
  for (float& v : codebook_) v = gauss(rng_);
  grad_.assign(S * K * D, 0.0f);
  cluster_size_.resize(S * K);
  embed_sum_.resize(S * K * D);
  reset_ema();
  since_used_.assign(S * K, 0);
  ring_state_.assign(2 * S, 0);
  c_sq_.resize(Eigen::Index(S * K));
  counts_.assign(S * K, 0.0f);
  sums_.assign(S * K * D, 0.0f);
  stage_mse_.assign(S, 0.0);
  perm_.resize(std::size_t(cfg_.restart_pool));
  usage_ = UsageStats(cfg_.stages, cfg_.codes);
  restarts_.assign(S, 0);
  ensure_capacity(std::max(max_vectors, 1));
  refresh_all_norms_if_needed();
}

void ResidualCodebooks::check_input(Eigen::Index rows, int depth) const {
  if (rows != cfg_.dim)
    throw Error("latent has " + std::to_string(rows) + " dims, the codebooks expect " + std::to_string(cfg_.dim));
  if (depth < 1 || depth > cfg_.stages)
    throw Error("depth " + std::to_string(depth) + " is outside 1.." + std::to_string(cfg_.stages));
}

void ResidualCodebooks::ensure_capacity(Eigen::Index n) {
  if (n <= r_.cols()) return;
  r_.resize(cfg_.dim, n);
  g_.resize(cfg_.dim, n);
  idx_.resize(n, cfg_.stages);
  dist_.resize(n);
}

Eigen::Map<const Eigen::MatrixXf> ResidualCodebooks::stage_codebook(int s) const {
  return {codebook_.data() + std::size_t(s) * cfg_.codes * cfg_.dim, cfg_.dim, cfg_.codes};
}

Eigen::Map<Eigen::MatrixXf> ResidualCodebooks::stage_mut(int s) {
  return {codebook_.data() + std::size_t(s) * cfg_.codes * cfg_.dim, cfg_.dim, cfg_.codes};
}

std::span<float> ResidualCodebooks::codebooks() {
  norms_stale_ = true;
  return codebook_;
}

void ResidualCodebooks::refresh_norms(int s) {
  column_sq_norms(stage_codebook(s), c_sq_.segment(Eigen::Index(s) * cfg_.codes, cfg_.codes));
}

void ResidualCodebooks::refresh_all_norms_if_needed() {
  if (!norms_stale_ && cfg_.learning == CodebookConfig::Learning::ema) return;
  for (int s = 0; s < cfg_.stages; ++s) refresh_norms(s);
  norms_stale_ = false;
}

void ResidualCodebooks::zero_grad() { std::fill(grad_.begin(), grad_.end(), 0.0f); }

void ResidualCodebooks::reset_ema() {
  std::fill(cluster_size_.begin(), cluster_size_.end(), 1.0f);
  std::copy(codebook_.begin(), codebook_.end(), embed_sum_.begin());
}

void ResidualCodebooks::encode(const Eigen::Ref<const Eigen::MatrixXf>& z, int depth,
                               Eigen::Ref<Eigen::MatrixXi> codes) {
  check_input(z.rows(), depth);
  assert(codes.rows() == z.cols() && codes.cols() == depth);
  const Eigen::Index N = z.cols();
  ensure_capacity(N);
  refresh_all_norms_if_needed();
  auto r = r_.leftCols(N);
  r = z;
  for (int s = 0; s < depth; ++s) {
    const auto c = stage_codebook(s);
    int* idx = codes.col(s).data();
    search_.run(c, c_sq_.segment(Eigen::Index(s) * cfg_.codes, cfg_.codes), r, idx, nullptr);
    if (s + 1 < depth)
      for (Eigen::Index n = 0; n < N; ++n) r.col(n) -= c.col(idx[n]);
  }
}

void ResidualCodebooks::decode(const Eigen::Ref<const Eigen::MatrixXi>& codes, int depth,
                               Eigen::Ref<Eigen::MatrixXf> zq) const {
  if (depth < 1 || depth > cfg_.stages || depth > codes.cols())
    throw Error("depth " + std::to_string(depth) + " is outside 1.." +
                std::to_string(std::min<Eigen::Index>(cfg_.stages, codes.cols())));
  assert(zq.rows() == cfg_.dim && zq.cols() == codes.rows());
  for (int s = 0; s < depth; ++s)
    for (Eigen::Index n = 0; n < codes.rows(); ++n)
      if (codes(n, s) < 0 || codes(n, s) >= cfg_.codes)
        throw Error("code " + std::to_string(codes(n, s)) + " at stage " + std::to_string(s) + " is outside 0.." +
                    std::to_string(cfg_.codes - 1));
  zq.setZero();
  for (int s = 0; s < depth; ++s) {
    const auto c = stage_codebook(s);
    for (Eigen::Index n = 0; n < codes.rows(); ++n) zq.col(n) += c.col(codes(n, s));
  }
}

QuantLosses ResidualCodebooks::forward(const Eigen::Ref<const Eigen::MatrixXf>& z, int depth,
                                       Eigen::Ref<Eigen::MatrixXf> zq, Pass pass) {
  check_input(z.rows(), depth);
  assert(zq.rows() == z.rows() && zq.cols() == z.cols());
  const Eigen::Index N = z.cols();
  const int K = cfg_.codes, D = cfg_.dim;
  const bool train = pass == Pass::train;
  const bool ema = cfg_.learning == CodebookConfig::Learning::ema;
  ensure_capacity(N);
  refresh_all_norms_if_needed();
  n_ = N;
  depth_ = depth;
  QuantLosses out;
  zq.setZero();
  if (N == 0) return out;
  auto r = r_.leftCols(N);
  auto g = g_.leftCols(N);
  r = z;
  g.setZero();
  for (int s = 0; s < depth; ++s) {
    const auto c = stage_codebook(s);
    int* idx = idx_.col(s).data();
    search_.run(c, c_sq_.segment(Eigen::Index(s) * K, K), r, idx, dist_.data());
    double sq = 0;
    for (Eigen::Index n = 0; n < N; ++n) sq += dist_[n];
    stage_mse_[s] = sq / (double(N) * D);
    out.codebook += stage_mse_[s];

    // Per-code counts and residual sums: the EMA update and the codebook-loss gradient use them.
    float* cnt = counts_.data() + std::size_t(s) * K;
    Eigen::Map<Eigen::MatrixXf> sum(sums_.data() + std::size_t(s) * K * D, D, K);
    std::fill(cnt, cnt + K, 0.0f);
    sum.setZero();
    for (Eigen::Index n = 0; n < N; ++n) {
      cnt[idx[n]] += 1.0f;
      sum.col(idx[n]) += r.col(n);
    }
    if (train) push_recent(s, N);

    for (Eigen::Index n = 0; n < N; ++n) {
      const auto q = c.col(idx[n]);  // q_s: a constant under stop-gradient
      zq.col(n) += q;
      r.col(n) -= q;  // r_{s+1}
      g.col(n) += r.col(n);
    }

    if (train) {
      usage_.add(s, idx, N);
      std::int32_t* since = since_used_.data() + std::size_t(s) * K;
      for (int k = 0; k < K; ++k) since[k] = cnt[k] > 0 ? 0 : (since[k] < INT_MAX ? since[k] + 1 : INT_MAX);
      if (ema) ema_update(s);
    }
  }
  out.commitment = cfg_.commitment * out.codebook;
  if (train) restart_dead(depth);
  return out;
}

void ResidualCodebooks::backward(const Eigen::Ref<const Eigen::MatrixXf>& dzq, Eigen::Ref<Eigen::MatrixXf> dz,
                                 float dcommitment, float dcodebook) {
  const Eigen::Index N = n_;
  const int K = cfg_.codes, D = cfg_.dim;
  assert(dzq.rows() == D && dzq.cols() == N && dz.rows() == D && dz.cols() == N);
  if (N == 0) return;
  dz += dzq;  // straight-through: ∂zq/∂z = I
  const double beta = cfg_.commitment * dcommitment;
  if (beta != 0) dz += float(2.0 * beta / (double(N) * D)) * g_.leftCols(N);
  if (cfg_.learning != CodebookConfig::Learning::loss || dcodebook == 0) return;
  const float scale = float(2.0 * dcodebook / (double(N) * D));
  for (int s = 0; s < depth_; ++s) {
    const auto c = stage_codebook(s);
    Eigen::Map<Eigen::MatrixXf> grad(grad_.data() + std::size_t(s) * K * D, D, K);
    Eigen::Map<const Eigen::MatrixXf> sum(sums_.data() + std::size_t(s) * K * D, D, K);
    const float* cnt = counts_.data() + std::size_t(s) * K;
    for (int k = 0; k < K; ++k)
      if (cnt[k] > 0) grad.col(k) += scale * (cnt[k] * c.col(k) - sum.col(k));
  }
}

Eigen::Ref<const Eigen::MatrixXi> ResidualCodebooks::last_codes() const {
  return idx_.topLeftCorner(n_, depth_);
}

// EMA codebook update with Laplace-smoothed cluster sizes (torch_reference.py, ema_update):
//   cluster_size ← γ·cluster_size + (1−γ)·count,  embed_sum ← γ·embed_sum + (1−γ)·sum,
//   n = Σ_k cluster_size_k,  smoothed_k = (cluster_size_k + ε) / (n + K·ε) · n,
//   c_k = embed_sum_k / smoothed_k.
void ResidualCodebooks::ema_update(int s) {
  const int K = cfg_.codes, D = cfg_.dim;
  const float gamma = float(cfg_.ema_decay), eps = float(cfg_.ema_epsilon);
  float* cs = cluster_size_.data() + std::size_t(s) * K;
  const float* cnt = counts_.data() + std::size_t(s) * K;
  Eigen::Map<Eigen::MatrixXf> es(embed_sum_.data() + std::size_t(s) * K * D, D, K);
  Eigen::Map<const Eigen::MatrixXf> sum(sums_.data() + std::size_t(s) * K * D, D, K);
  double n = 0;
  for (int k = 0; k < K; ++k) {
    cs[k] = gamma * cs[k] + (1.0f - gamma) * cnt[k];
    n += cs[k];
  }
  es = gamma * es + (1.0f - gamma) * sum;
  if (!(n > 0)) return;
  auto c = stage_mut(s);
  const float nf = float(n);
  for (int k = 0; k < K; ++k) {
    const float smoothed = (cs[k] + eps) / (nf + K * eps) * nf;
    c.col(k) = es.col(k) / smoothed;
  }
  refresh_norms(s);
}

// The restart pool serves training only, so it is allocated on first use: loading a model for
// inference never pays for it (and an untrusted model file's config cannot make a load
// allocate S x P x D floats it never needs).
std::span<float> ResidualCodebooks::restart_pool() {
  if (ring_.empty()) ring_.assign(std::size_t(cfg_.stages) * cfg_.restart_pool * cfg_.dim, 0.0f);
  return ring_;
}

float* ResidualCodebooks::ring(int s) {
  return restart_pool().data() + std::size_t(s) * cfg_.restart_pool * cfg_.dim;
}

// Keeps cfg.restart_pool_per_step random columns of this stage's input residual r_s.
// Called before r is advanced to r_{s+1}.
void ResidualCodebooks::push_recent(int s, Eigen::Index n) {
  const int P = cfg_.restart_pool, D = cfg_.dim;
  std::int64_t& fill = ring_state_[s];
  std::int64_t& next = ring_state_[cfg_.stages + s];
  Eigen::Map<Eigen::MatrixXf> pool(ring(s), D, P);
  std::uniform_int_distribution<Eigen::Index> pick(0, n - 1);
  const Eigen::Index m = std::min<Eigen::Index>(n, cfg_.restart_pool_per_step);
  for (Eigen::Index i = 0; i < m; ++i) {
    pool.col(next) = r_.col(pick(rng_));
    next = (next + 1) % P;
    fill = std::min<std::int64_t>(fill + 1, P);
  }
}

// A code unused for dead_after_steps train steps of its stage takes a recent residual of the
// stage (distinct draws from the pool) and restarts its EMA statistics as a fresh code.
void ResidualCodebooks::restart_dead(int depth) {
  const int M = cfg_.dead_after_steps, K = cfg_.codes, D = cfg_.dim;
  if (M == 0) return;
  for (int s = 0; s < depth; ++s) {
    std::int32_t* since = since_used_.data() + std::size_t(s) * K;
    const int fill = int(ring_state_[s]);
    if (fill == 0) continue;
    Eigen::Map<const Eigen::MatrixXf> pool(ring(s), D, fill);
    auto c = stage_mut(s);
    Eigen::Map<Eigen::MatrixXf> es(embed_sum_.data() + std::size_t(s) * K * D, D, K);
    float* cs = cluster_size_.data() + std::size_t(s) * K;
    int drawn = 0;
    for (int k = 0; k < K && drawn < fill; ++k) {
      if (since[k] < M) continue;
      if (drawn == 0) std::iota(perm_.begin(), perm_.begin() + fill, 0);
      const int j = std::uniform_int_distribution<int>(drawn, fill - 1)(rng_);  // partial Fisher-Yates
      std::swap(perm_[drawn], perm_[j]);
      c.col(k) = pool.col(perm_[drawn++]);
      es.col(k) = c.col(k);
      cs[k] = 1.0f;
      since[k] = 0;
      ++restarts_[s];
    }
    if (drawn > 0) refresh_norms(s);
  }
}

int ResidualCodebooks::stale_codes(int s) const {
  const std::int32_t* since = since_used_.data() + std::size_t(s) * cfg_.codes;
  if (cfg_.dead_after_steps == 0) return 0;
  return int(std::count_if(since, since + cfg_.codes, [&](std::int32_t v) { return v >= cfg_.dead_after_steps; }));
}

void ResidualCodebooks::reset_usage() {
  usage_.reset();
  std::fill(restarts_.begin(), restarts_.end(), 0);
}

// Writes up to P random columns of r (distinct) into stage s's pool.
void ResidualCodebooks::fill_pool(int s, const Eigen::Ref<const Eigen::MatrixXf>& r) {
  const int P = cfg_.restart_pool, D = cfg_.dim;
  const int n = int(r.cols()), m = std::min(n, P);
  std::vector<int> order(n);
  std::iota(order.begin(), order.end(), 0);
  for (int i = 0; i < m; ++i) std::swap(order[i], order[std::uniform_int_distribution<int>(i, n - 1)(rng_)]);
  Eigen::Map<Eigen::MatrixXf> pool(ring(s), D, P);
  for (int i = 0; i < m; ++i) pool.col(i) = r.col(order[i]);
  ring_state_[s] = m;
  ring_state_[cfg_.stages + s] = m % P;
}

void ResidualCodebooks::init_from(const Eigen::Ref<const Eigen::MatrixXf>& z) {
  check_input(z.rows(), 1);
  if (z.cols() == 0) throw Error("codebook initialisation needs at least one latent vector, got 0");
  const int n_all = int(z.cols());
  const int n = std::min(n_all, cfg_.kmeans_init_vectors);
  Eigen::MatrixXf r(cfg_.dim, n);
  if (n == n_all) {
    r = z;
  } else {  // random subset without replacement
    std::vector<int> order(n_all);
    std::iota(order.begin(), order.end(), 0);
    for (int i = 0; i < n; ++i) std::swap(order[i], order[std::uniform_int_distribution<int>(i, n_all - 1)(rng_)]);
    std::sort(order.begin(), order.begin() + n);
    for (int i = 0; i < n; ++i) r.col(i) = z.col(order[i]);
  }
  KMeansOptions opts;
  opts.iters = cfg_.kmeans_iters;
  opts.tol = 1e-4;
  opts.threads = cfg_.threads;
  std::vector<int> idx(n);
  for (int s = 0; s < cfg_.stages; ++s) {
    fill_pool(s, r);
    auto c = stage_mut(s);
    c = kmeans(r, cfg_.codes, rng_, opts).centres;
    refresh_norms(s);
    search_.run(c, c_sq_.segment(Eigen::Index(s) * cfg_.codes, cfg_.codes), r, idx.data(), nullptr);
    for (int i = 0; i < n; ++i) r.col(i) -= c.col(idx[i]);
  }
  norms_stale_ = false;
  reset_ema();
  std::fill(since_used_.begin(), since_used_.end(), 0);
}

void ResidualCodebooks::init_from(std::span<const Eigen::MatrixXf> batches) {
  Eigen::Index total = 0;
  for (const auto& b : batches) {
    check_input(b.rows(), 1);
    total += b.cols();
  }
  Eigen::MatrixXf z(cfg_.dim, total);
  Eigen::Index at = 0;
  for (const auto& b : batches) {
    z.middleCols(at, b.cols()) = b;
    at += b.cols();
  }
  init_from(z);
}

}  // namespace tessera::quant
