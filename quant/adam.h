// adam.h — Adam and AdamW over one flat parameter slab (all layers' parameters in a row).
// Kingma & Ba 2015, "Adam", Algorithm 1, with bias correction; at update t = 1, 2, ...:
//   m ← β1·m + (1 − β1)·g,   v ← β2·v + (1 − β2)·g²
//   θ ← θ − lr · m̂ / (√v̂ + ε),   m̂ = m / (1 − β1^t),   v̂ = v / (1 − β2^t)
// Weight decay λ, two kinds:
//   decoupled (AdamW, Loshchilov & Hutter 2019, Algorithm 2): θ ← θ·(1 − lr·λ) before the step
//   coupled L2 (as torch.optim.Adam's weight_decay): g ← g + λ·θ
// lr comes from the caller each step (quant/lr_schedule.h), so the decay follows the schedule,
// as in torch.optim.AdamW. Element-wise math is float; bias corrections are double.
// N parameters: params, grads, m and v are all flat arrays of length N in the same layout.
#pragma once
#include <cstddef>
#include <cstdint>
#include <span>
#include <vector>

#include "quant/float_buffer.h"
#include "quant/thread_pool.h"

namespace tessera::quant {

struct AdamConfig {
  double beta1 = 0.9, beta2 = 0.999, eps = 1e-8;
  double weight_decay = 0.0;   // λ; 0 disables
  bool decoupled = true;       // true: AdamW; false: L2 added to the gradient
};

// Usage: Adam opt(n_params, cfg); each step: opt.step(params, grads, schedule.at(step));
class Adam {
 public:
  // Throws tessera::Error for betas outside [0, 1), eps <= 0 or weight_decay < 0.
  explicit Adam(std::size_t n, AdamConfig cfg = {});

  // One update of params[0..n) from grads[0..n); allocation-free.
  // With a pool the parameters are split over its lanes in blocks; every element's update
  // is the same arithmetic either way, so the result does not depend on the pool.
  void step(float* params, const float* grads, float lr, ThreadPool* pool = nullptr);

  std::size_t size() const { return m_.size(); }
  std::int64_t steps() const { return t_; }   // updates done so far (t)
  const AdamConfig& config() const { return cfg_; }
  // Moments, for checkpoints (same layout as the parameter slab).
  std::span<const float> m() const { return m_; }
  std::span<const float> v() const { return v_; }
  // Resume from a checkpoint; throws tessera::Error if the sizes do not match or t < 0.
  void restore(std::int64_t t, std::span<const float> m, std::span<const float> v);

 private:
  AdamConfig cfg_;
  FloatBuffer m_, v_;
  std::int64_t t_ = 0;
};

}  // namespace tessera::quant
