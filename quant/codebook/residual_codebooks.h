// residual_codebooks.h — residual vector quantization: S stages of K codes, each stage
// quantising what the stages before it left over; training forward/backward and state.
// B batch, L frames, N = B·L vectors, D code dims, K codes per stage, S stages, d depth.
//
// Layouts (all column-major, the Eigen default):
//   latents   z, zq, dz, dzq: D x N floats, one vector per column, so each vector is
//             contiguous. The encoder's z [B, D, L] goes to column n = b·L + l.
//   codes     N x d ints: column s holds the stage-s code of every vector (the token file
//             [frames, depth] is its row-major transpose view).
//   codebooks S x K x D floats: value (s, k, j) at codebooks()[(s·K + k)·D + j], i.e. stage s
//             is a D x K matrix with one code per column. codebook_grads() and
//             ema_embed_sum() share this layout; ema_cluster_size() and steps_since_used()
//             are S x K.
//
// Forward at depth d (van den Oord et al. 2017, residual form as in Juang & Gray 1982):
//   r_0 = z;  k_s(n) = argmin_k ‖r_s,n − c_s,k‖²;  q_s = c_s,k_s;  r_{s+1} = r_s − q_s  (s < d)
//   zq = Σ_{s<d} q_s, returned as the straight-through value: its gradient reaches z as is.
//   commitment = β · Σ_s mean‖r_s − sg(q_s)‖²   (mean over N·D elements, as F.mse_loss)
//   codebook   =     Σ_s mean‖sg(r_s) − q_s‖²   (same value / β; trains the codes in loss mode)
// Backward. The chosen codes q_t are constants (a stop-gradient on codebook rows picked by
// argmin), so r_s = z − Σ_{t<s} q_t and ∂r_s/∂z = I for every stage. Hence
//   ∂commitment/∂z   = (2β / (N·D)) · Σ_{s<d} (r_s − q_s) = (2β / (N·D)) · Σ_{s=1..d} r_s
//   ∂codebook/∂c_s,k = (2 / (N·D)) · Σ_{n: k_s(n)=k} (c_s,k − r_s,n)
//                    = (2 / (N·D)) · (count_s,k · c_s,k − sum_s,k)
// and dz = dzq + dcommitment · ∂commitment/∂z (with β = 0, dz is dzq bit for bit).
//
// One training step:
//   int d = draw_depth(cfg, rng);                     // stage dropout
//   auto losses = rvq.forward(z, d, zq, ResidualCodebooks::Pass::train);
//   ... decoder forward/backward gives dzq ...
//   rvq.backward(dzq, dz);                            // dz += ..., grads += ... (loss mode)
//   ... optimiser steps rvq.codebooks() from rvq.codebook_grads() (loss mode only) ...
// A train pass updates, after the search of each stage, that stage's EMA statistics and
// codebook (EMA mode, as torch_reference.py's ema_update), its usage counters and its pool of
// recent residuals, and at the end restarts dead codes. Scratch is sized for max_vectors and
// grows once if a larger N arrives; after that a step allocates nothing (tested). Not
// thread-safe: encode() and forward() share the scratch and the search threads.
#pragma once
#include <Eigen/Core>
#include <cstdint>
#include <random>
#include <span>
#include <vector>

#include "quant/codebook/codebook_config.h"
#include "quant/codebook/kmeans.h"
#include "quant/codebook/usage_stats.h"
#include "quant/float_buffer.h"

namespace tessera::quant {

struct QuantLosses {
  double commitment = 0;  // β · Σ_s mean‖r_s − sg(q_s)‖²: add to the training loss
  double codebook = 0;    // Σ_s mean‖sg(r_s) − q_s‖²: add too in loss mode (its gradient only trains codes)
};

// Throws tessera::Error naming the first setting that cannot work ("codebooks: codes must be ...").
void validate(const CodebookConfig& cfg);

// Stage dropout: the depth (1..stages) to train this batch at, from cfg.schedule, cfg.p_full.
int draw_depth(const CodebookConfig& cfg, std::mt19937_64& rng);

class ResidualCodebooks {
 public:
  enum class Pass { eval, train };

  // Codebooks start as N(0, 1) draws from cfg.seed with cluster_size 1 and embed_sum equal to
  // the codebook (the reference's initial state); call init_from() before training.
  explicit ResidualCodebooks(const CodebookConfig& cfg, int max_vectors = 4096);

  const CodebookConfig& config() const { return cfg_; }
  int stages() const { return cfg_.stages; }
  int codes() const { return cfg_.codes; }
  int dim() const { return cfg_.dim; }

  // Inference. z: D x N; codes: N x depth (sized by the caller). Throws tessera::Error for a
  // depth outside 1..stages or z without D rows.
  void encode(const Eigen::Ref<const Eigen::MatrixXf>& z, int depth, Eigen::Ref<Eigen::MatrixXi> codes);
  // zq (D x N) = Σ_{s<depth} c_s,codes(n,s); codes: N x (>= depth). Throws for a code outside 0..K-1.
  void decode(const Eigen::Ref<const Eigen::MatrixXi>& codes, int depth, Eigen::Ref<Eigen::MatrixXf> zq) const;

  // Training or evaluation forward (see the top of this file); zq: D x N, sized by the caller.
  QuantLosses forward(const Eigen::Ref<const Eigen::MatrixXf>& z, int depth, Eigen::Ref<Eigen::MatrixXf> zq,
                      Pass pass);
  // After forward: dz += dzq + dcommitment·∂commitment/∂z; in loss mode also
  // codebook_grads() += dcodebook·∂codebook/∂c for the stages used. dzq, dz: D x N.
  void backward(const Eigen::Ref<const Eigen::MatrixXf>& dzq, Eigen::Ref<Eigen::MatrixXf> dz,
                float dcommitment = 1.0f, float dcodebook = 1.0f);
  // Of the last forward: codes (N x depth) and mean‖r_s − q_s‖² per stage s < depth.
  Eigen::Ref<const Eigen::MatrixXi> last_codes() const;
  double stage_mse(int s) const { return stage_mse_[s]; }

  // k-means++ then Lloyd (cfg.kmeans_iters) for stage 0 on z (D x N, at most
  // cfg.kmeans_init_vectors random columns), then stage 1 on the residuals left by the new
  // stage 0, and so on. Resets the EMA statistics, the dead-code counters and fills each
  // stage's pool of recent residuals.
  void init_from(const Eigen::Ref<const Eigen::MatrixXf>& z);
  void init_from(std::span<const Eigen::MatrixXf> batches);  // the batches side by side

  // Flat state, contiguous, in the layouts above: for the optimiser and for checkpoints.
  // The mutable codebook accessor marks the cached ‖c‖² stale; in loss mode they are also
  // recomputed at every forward and encode, since the optimiser writes through the span.
  std::span<float> codebooks();
  std::span<const float> codebooks() const { return codebook_; }
  std::span<float> codebook_grads() { return grad_; }
  void zero_grad();
  std::span<float> ema_cluster_size() { return cluster_size_; }         // S x K
  std::span<float> ema_embed_sum() { return embed_sum_; }               // S x K x D
  std::span<std::int32_t> steps_since_used() { return since_used_; }    // S x K
  std::span<float> restart_pool();                                      // S x P x D (allocated on first use)
  std::span<std::int64_t> restart_pool_state() { return ring_state_; }  // fill[S], next[S]
  std::mt19937_64& rng() { return rng_; }  // restarts and subsampling draw from it
  // cluster_size ← 1 and embed_sum ← codebook for every stage (after setting codebooks by hand).
  void reset_ema();
  Eigen::Map<const Eigen::MatrixXf> stage_codebook(int s) const;  // D x K

  // Statistics of the train passes since the last reset_usage().
  const UsageStats& usage() const { return usage_; }
  UsageStats& usage() { return usage_; }  // for restoring a checkpoint's counts
  std::int64_t restarts(int s) const { return restarts_[s]; }
  int stale_codes(int s) const;  // codes of stage s unused for >= dead_after_steps steps now
  void reset_usage();

 private:
  void check_input(Eigen::Index rows, int depth) const;
  void ensure_capacity(Eigen::Index n);
  void refresh_norms(int s);
  void refresh_all_norms_if_needed();
  Eigen::Map<Eigen::MatrixXf> stage_mut(int s);
  void ema_update(int s);
  void push_recent(int s, Eigen::Index n);
  void restart_dead(int depth);
  void fill_pool(int s, const Eigen::Ref<const Eigen::MatrixXf>& r);

  CodebookConfig cfg_;
  std::mt19937_64 rng_;
  NearestSearch search_;
  FloatBuffer codebook_, grad_;                // S x K x D
  FloatBuffer cluster_size_;                   // S x K, EMA
  FloatBuffer embed_sum_;                      // S x K x D, EMA
  std::vector<std::int32_t> since_used_;       // S x K, train steps of the stage since last use
  float* ring(int s);                          // stage s's part of the restart pool
  FloatBuffer ring_;                           // S x P x D recent residuals of each stage
  std::vector<std::int64_t> ring_state_;       // fill per stage, then next slot per stage
  Eigen::VectorXf c_sq_;                       // S·K cached ‖c‖²
  bool norms_stale_ = true;
  // Of the last forward.
  FloatBuffer counts_;                         // S x K vectors per code
  FloatBuffer sums_;                           // S x K x D sum of residuals per code
  std::vector<double> stage_mse_;              // S
  Eigen::Index n_ = 0;
  int depth_ = 0;
  // Scratch, capacity columns.
  Eigen::MatrixXf r_;                          // D x cap residual
  Eigen::MatrixXf g_;                          // D x cap Σ_s r_{s+1}, for ∂commitment/∂z
  Eigen::MatrixXi idx_;                        // cap x S codes
  FloatBuffer dist_;                           // cap
  std::vector<int> perm_;                      // P, restart draws without replacement
  // Statistics.
  UsageStats usage_;
  std::vector<std::int64_t> restarts_;         // S
};

}  // namespace tessera::quant
