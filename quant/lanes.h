// lanes.h — how a batch is split over a ThreadPool's lanes and how the lanes' private
// gradients are added back, in a fixed order so results depend only on the lane count.
// B batch.
#pragma once
#include <cstddef>
#include <vector>

#include "quant/param_slab.h"
#include "quant/thread_pool.h"

namespace tessera::quant {

// Items [b0, b0 + nb) of a batch of B for lane l of n.
struct LaneItems {
  int b0, nb;
};
inline LaneItems lane_items(int B, int l, int n) {
  const int b0 = int(long(B) * l / n);
  return {b0, int(long(B) * (l + 1) / n) - b0};
}

// The ParamView lane l writes gradients through: the slab itself for lane 0, else the
// lane's private buffer for `range` (resized and zeroed here).
inline ParamView lane_params(ParamSlab& slab, ParamRef range, int l, std::vector<float>& priv) {
  if (l == 0) return slab.view();
  priv.assign(range.size, 0.0f);
  return {slab.params(), priv.data(), range.offset};
}

// slab grads[range] += Σ_{l ≥ 1, used[l]} priv[l], lanes in order, elements split over the pool.
template <class Lanes>
void reduce_lane_grads(ThreadPool& pool, ParamSlab& slab, ParamRef range, const Lanes& lanes) {
  float* g = slab.grads() + range.offset;
  pool.parallel_for(range.size, [&](std::size_t i0, std::size_t i1) {
    for (std::size_t l = 1; l < lanes.size(); ++l) {
      if (lanes[l].nb == 0) continue;
      const float* src = lanes[l].grads.data();
      for (std::size_t i = i0; i < i1; ++i) g[i] += src[i];
    }
  });
}

}  // namespace tessera::quant
