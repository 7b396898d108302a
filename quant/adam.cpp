// adam.cpp — Adam / AdamW update (formulas in adam.h), blocked so each chunk stays in L1.
#include "quant/adam.h"

#include <algorithm>
#include <cmath>
#include <string>

#include <Eigen/Core>

#include "audio/error.h"

namespace tessera::quant {

Adam::Adam(std::size_t n, AdamConfig cfg) : cfg_(cfg), m_(n, 0.0f), v_(n, 0.0f) {
  auto bad = [](const char* what, double x) {
    throw Error(std::string("adam: ") + what + " " + std::to_string(x));
  };
  if (!(cfg.beta1 >= 0 && cfg.beta1 < 1)) bad("beta1 must be in [0, 1), got", cfg.beta1);
  if (!(cfg.beta2 >= 0 && cfg.beta2 < 1)) bad("beta2 must be in [0, 1), got", cfg.beta2);
  if (!(cfg.eps > 0)) bad("eps must be positive, got", cfg.eps);
  if (!(cfg.weight_decay >= 0)) bad("weight_decay must be >= 0, got", cfg.weight_decay);
}

void Adam::step(float* params, const float* grads, float lr, ThreadPool* pool) {
  using Arr = Eigen::Map<Eigen::ArrayXf>;
  using CArr = Eigen::Map<const Eigen::ArrayXf>;
  ++t_;
  // Bias corrections in double, as torch does with Python floats.
  const double bc1 = 1.0 - std::pow(cfg_.beta1, double(t_));
  const double bc2 = 1.0 - std::pow(cfg_.beta2, double(t_));
  const float step_size = float(lr / bc1);
  const float inv_bc2_sqrt = float(1.0 / std::sqrt(bc2));
  const float b1 = float(cfg_.beta1), c1 = float(1.0 - cfg_.beta1);
  const float b2 = float(cfg_.beta2), c2 = float(1.0 - cfg_.beta2);
  const float eps = float(cfg_.eps);
  const float wd = float(cfg_.weight_decay);
  const float shrink = float(1.0 - double(lr) * cfg_.weight_decay);
  const bool l2 = wd != 0 && !cfg_.decoupled, decoupled = wd != 0 && cfg_.decoupled;

  constexpr std::ptrdiff_t kBlock = 2048;   // 4 arrays × 8 KB: stays in L1/L2 across the passes
  const std::ptrdiff_t n = std::ptrdiff_t(m_.size());
  auto update = [&](std::ptrdiff_t begin, std::ptrdiff_t end) {
  for (std::ptrdiff_t i = begin; i < end; i += kBlock) {
    const std::ptrdiff_t len = std::min(kBlock, end - i);
    Arr p(params + i, len), m(m_.data() + i, len), v(v_.data() + i, len);
    CArr g(grads + i, len);
    if (decoupled) p *= shrink;
    if (l2) {
      m = b1 * m + c1 * (g + wd * p);
      v = b2 * v + c2 * (g + wd * p).square();
    } else {
      m = b1 * m + c1 * g;
      v = b2 * v + c2 * g.square();
    }
    p -= step_size * m / (v.sqrt() * inv_bc2_sqrt + eps);
  }
  };
  if (!pool || pool->size() == 1) return update(0, n);
  // Lane chunks of whole blocks: no two lanes write one cache line.
  const std::size_t blocks = std::size_t((n + kBlock - 1) / kBlock);
  pool->parallel_for(blocks, [&](std::size_t b0, std::size_t b1) {
    update(std::ptrdiff_t(b0) * kBlock, std::min(n, std::ptrdiff_t(b1) * kBlock));
  });
}

void Adam::restore(std::int64_t t, std::span<const float> m, std::span<const float> v) {
  if (m.size() != m_.size() || v.size() != v_.size())
    throw Error("adam state has " + std::to_string(m.size()) + " and " + std::to_string(v.size()) +
                " moments, the model has " + std::to_string(m_.size()) + " parameters");
  if (t < 0) throw Error("adam state: negative step count " + std::to_string(t));
  std::copy(m.begin(), m.end(), m_.begin());
  std::copy(v.begin(), v.end(), v_.begin());
  t_ = t;
}

}  // namespace tessera::quant
