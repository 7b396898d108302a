// grad_clip.cpp — global L2 norm and clipping (rule in grad_clip.h).
#include "quant/grad_clip.h"

#include <cmath>
#include <string>

#include <Eigen/Core>

#include "audio/error.h"

namespace tessera::quant {

double grad_norm(const float* g, std::size_t n) {
  // Four double accumulators: accurate for millions of terms and still vectorisable.
  double s[4] = {0, 0, 0, 0};
  std::size_t i = 0;
  for (; i + 4 <= n; i += 4)
    for (int k = 0; k < 4; ++k) s[k] += double(g[i + k]) * double(g[i + k]);
  for (; i < n; ++i) s[0] += double(g[i]) * double(g[i]);
  return std::sqrt((s[0] + s[1]) + (s[2] + s[3]));
}

double clip_grad_norm(float* g, std::size_t n, double max_norm) {
  if (!(max_norm > 0)) throw Error("gradient clipping: max_norm must be positive, got " + std::to_string(max_norm));
  const double norm = grad_norm(g, n);
  if (!std::isfinite(norm)) return norm;
  const double c = max_norm / (norm + 1e-6);
  if (c < 1.0) Eigen::Map<Eigen::ArrayXf>(g, Eigen::Index(n)) *= float(c);
  return norm;
}

}  // namespace tessera::quant
