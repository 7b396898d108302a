// gemm.h — Eigen maps that turn frame ranges of a SeqView and weight blocks into GEMM operands.
// C channels, T frames, k taps. Every product here is `dst.noalias() += a * b`: Eigen's
// `=` would clear dst in an extra pass, so destinations are pre-set (bias) or accumulate.
#pragma once
#include <Eigen/Core>
#include <cassert>

#include "quant/tensor.h"

namespace tessera::quant::gemm {

using Mat = Eigen::Matrix<float, Eigen::Dynamic, Eigen::Dynamic>;
using RowMat = Eigen::Matrix<float, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>;
using Stride = Eigen::OuterStride<>;
using MapMat = Eigen::Map<Mat, 0, Stride>;
using CMapMat = Eigen::Map<const Mat, 0, Stride>;
using MapRowMat = Eigen::Map<RowMat, 0, Stride>;
using CMapRowMat = Eigen::Map<const RowMat, 0, Stride>;

// `rows` values starting at frame t0 of item b, `cols` columns that start `step` time
// steps apart: column j begins at frame t0 + j·step. rows > C spans the following
// frames, which are the item's next time steps only if v.tstride == 1; such columns
// overlap, which is fine for a GEMM operand that is only read.
inline CMapMat frames(const CSeqView& v, int b, int t0, long rows, long cols, long step = 1) {
  assert(rows <= v.C || v.tstride == 1);
  return {v.frame(b, t0), rows, cols, Stride(step * v.tstride * v.C)};
}
inline MapMat frames(const SeqView& v, int b, int t0, long rows, long cols, long step = 1) {
  assert(rows <= v.C || v.tstride == 1);
  return {v.frame(b, t0), rows, cols, Stride(step * v.tstride * v.C)};
}

// Block j (C_out × C_in) of a weight stored row-major as (C_out, k, C_in).
inline CMapRowMat tap(const float* w, int c_out, int k, int c_in, int j) {
  return {w + long(j) * c_in, c_out, c_in, Stride(long(k) * c_in)};
}
inline MapRowMat tap(float* w, int c_out, int k, int c_in, int j) {
  return {w + long(j) * c_in, c_out, c_in, Stride(long(k) * c_in)};
}

// db += Σ_t dY(:, t), summed column by column: the order of every element's sum is then
// fixed, where Eigen's rowwise().sum() changes it with the destination's alignment.
template <class Vec, class M>
void add_column_sum(Vec&& db, const M& dY) {
  for (Eigen::Index t = 0; t < dY.cols(); ++t) db += dY.col(t);
}

}  // namespace tessera::quant::gemm
