// gemm.h — Eigen maps that turn frame ranges of a SeqView and weight blocks into GEMM operands.
// C channels, T frames, k taps. Every product here is `dst.noalias() += a * b`: Eigen's
// `=` would clear dst in an extra pass, so destinations are pre-set (bias) or accumulate.
#pragma once
#include <Eigen/Core>
#include <algorithm>
#include <cassert>

#include "quant/layers/panel_gemm.h"
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

// Y += W · X with the inner dimension cut into pieces of at most kInner. Eigen 3.4 packs a
// row-major W of depth 256 into a panel (48 rows × 256) that fills a 48 KB L1 on its own;
// at depth 128 the forward products ran ~1.4× faster with AVX-512 (256×256 · 256×544:
// ~120 → ~170 GFLOP/s) and ~1.1× with SSE2, where the backward products (dW, dX) gained
// nothing (a standalone timing of these shapes on a 2-core AVX-512 EPYC: CPU time,
// median of 40 runs, Eigen 3.4.0).
constexpr Eigen::Index kInner = 128;
template <class Y, class W, class X>
void add_product(Y&& y, const W& w, const X& x) {
  for (Eigen::Index c0 = 0; c0 < w.cols(); c0 += kInner) {
    const Eigen::Index cn = std::min(kInner, w.cols() - c0);
    y.noalias() += w.middleCols(c0, cn) * x.middleRows(c0, cn);
  }
}

// The three products of the convolutions. With AVX-512 they run on panel_gemm (about
// 1.2x Eigen's speed on these shapes; see panel_gemm.h), else on Eigen.
// y += w · x (w: a row-major weight block, x: frames).
inline void add_wx(MapMat y, const CMapRowMat& w, const CMapMat& x) {
  if (!panel_gemm::available()) return add_product(y, w, x);
  panel_gemm::add_product(y.data(), y.outerStride(), {w.data(), w.outerStride(), 0, 1, int(w.rows()), int(w.cols()), 1},
                          {x.data(), x.outerStride()}, int(x.cols()));
}
// y += wᵀ · x (the input gradient of y = w · x).
inline void add_wtx(MapMat y, const CMapRowMat& w, const CMapMat& x) {
  if (!panel_gemm::available()) {
    y.noalias() += w.transpose() * x;
    return;
  }
  panel_gemm::add_product(y.data(), y.outerStride(), {w.data(), 1, 0, w.outerStride(), int(w.cols()), int(w.rows()), 1},
                          {x.data(), x.outerStride()}, int(x.cols()));
}
// dw += dy · xᵀ (the weight gradient of dy = w · x), computed as dwᵀ += x · dyᵀ.
inline void add_dyxt(MapRowMat dw, const CMapMat& dy, const CMapMat& x) {
  if (!panel_gemm::available()) {
    dw.noalias() += dy * x.transpose();
    return;
  }
  panel_gemm::add_product(dw.data(), dw.outerStride(), {x.data(), 1, 0, x.outerStride(), int(x.rows()), int(x.cols()), 1},
                          {dy.data(), 1, 0, dy.outerStride()}, int(dy.rows()));
}

// db += Σ_t dY(:, t), summed column by column: the order of every element's sum is then
// fixed, where Eigen's rowwise().sum() changes it with the destination's alignment.
template <class Vec, class M>
void add_column_sum(Vec&& db, const M& dY) {
  for (Eigen::Index t = 0; t < dY.cols(); ++t) db += dY.col(t);
}

}  // namespace tessera::quant::gemm
