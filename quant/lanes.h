// lanes.h — how a batch is split over a ThreadPool's lanes and how the lanes' private
// gradients are added back, in a fixed order so results depend only on the lane count.
// B batch.
#pragma once
#include <algorithm>
#include <cstddef>
#include <vector>

#include "quant/float_buffer.h"
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
// lane's private buffer for `range`, which is all zeros between backward passes
// (reduce_lane_grads clears it as it reads it).
inline ParamView lane_params(ParamSlab& slab, ParamRef range, int l, FloatBuffer& priv) {
  if (l == 0) return slab.view();
  if (priv.size() != range.size) priv.assign(range.size, 0.0f);
  return {slab.params(), priv.data(), range.offset};
}

// slab grads[range] += Σ_{l ≥ 1} priv[l] in lane order, then priv[l] = 0; the elements
// are split over the pool. Lanes without items this batch hold zeros and are skipped.
template <class Lanes>
void reduce_lane_grads(ThreadPool& pool, ParamSlab& slab, ParamRef range, Lanes& lanes) {
  float* g = slab.grads() + range.offset;
  pool.parallel_for(range.size, [&](std::size_t i0, std::size_t i1) {
    for (std::size_t l = 1; l < lanes.size(); ++l) {
      float* src = lanes[l].grads.data();
      if (lanes[l].nb == 0 || lanes[l].grads.size() != range.size) continue;
      for (std::size_t i = i0; i < i1; ++i) g[i] += src[i], src[i] = 0.0f;
    }
  });
}

// Restores the all-zero invariant of the private buffers after a failed backward.
template <class Lanes>
void clear_lane_grads(Lanes& lanes) {
  for (auto& lane : lanes) std::fill(lane.grads.begin(), lane.grads.end(), 0.0f);
}

}  // namespace tessera::quant
