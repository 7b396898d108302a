// chunk_window.h — what the chunked encoder and decoder share: their argument checks and
// the sliding window of input frames (columns) that a chunk reads from.
#pragma once
#include <algorithm>
#include <cstdint>
#include <string>

#include <Eigen/Core>

#include "audio/error.h"

namespace tessera::quant::chunk_window {

// Throws tessera::Error for depth outside 1..stages or chunk < 1; `what` names the coder.
inline void check(const char* what, int depth, int stages, int chunk) {
  if (depth < 1 || depth > stages)
    throw Error("depth " + std::to_string(depth) + " is outside 1.." + std::to_string(stages) + " (the model's stages)");
  if (chunk < 1)
    throw Error(std::string(what) + " chunk must be at least 1 code frame, got " + std::to_string(chunk));
}

// The window holds frames [w0, w0 + wn) in its first wn columns; drops those before
// `first_needed` by moving the rest to the front (a few context frames per round).
inline void slide(Eigen::MatrixXf& window, std::int64_t& w0, std::int64_t& wn, std::int64_t first_needed) {
  const std::int64_t drop = std::clamp<std::int64_t>(first_needed - w0, 0, wn);
  if (drop == 0) return;
  for (Eigen::Index t = 0; t < Eigen::Index(wn - drop); ++t) window.col(t) = window.col(t + Eigen::Index(drop));
  w0 += drop, wn -= drop;
}

}  // namespace tessera::quant::chunk_window
