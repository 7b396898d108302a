// conv1d.cpp — Conv1d forward/backward: per item, strided frame views times weight blocks.
// B batch, C channels, T frames, k taps.
#include "quant/layers/conv1d.h"

#include <cassert>

#include "audio/error.h"
#include "quant/layers/elu.h"
#include "quant/layers/gemm.h"
#include "quant/layers/init.h"

namespace tessera::quant {

using namespace gemm;

// torch.nn.Conv1d(padding='same'): total d·(k − 1), left half rounded down (torch 1.13,
// Conv1d._conv_forward / F.pad); for odd k both sides are (k − 1)·d / 2.
Conv1dShape Conv1dShape::same(int c_in, int c_out, int k, int dilation) {
  const int total = dilation * (k - 1);
  return {c_in, c_out, k, 1, dilation, total / 2, total - total / 2};
}

Conv1dShape Conv1dShape::causal(int c_in, int c_out, int k, int dilation) {
  return {c_in, c_out, k, 1, dilation, dilation * (k - 1), 0};
}

Conv1dShape Conv1dShape::padded(int c_in, int c_out, int k, int stride, int pad, int dilation) {
  return {c_in, c_out, k, stride, dilation, pad, pad};
}

int Conv1dShape::out_frames(int t_in) const {
  const int span = t_in + pad_left + pad_right - dilation * (k - 1) - 1;
  return span < 0 ? 0 : span / stride + 1;
}

Conv1d::Conv1d(ParamSlab& slab, const std::string& name, const Conv1dShape& shape) : s(shape) {
  if (s.c_in < 1 || s.c_out < 1 || s.k < 1 || s.stride < 1 || s.dilation < 1 || s.pad_left < 0 ||
      s.pad_right < 0)
    throw Error("conv1d '" + name + "': invalid shape (c_in " + std::to_string(s.c_in) + ", c_out " +
                std::to_string(s.c_out) + ", k " + std::to_string(s.k) + ", stride " +
                std::to_string(s.stride) + ", dilation " + std::to_string(s.dilation) + ")");
  w = slab.add(name + ".w", {s.c_out, s.k, s.c_in});
  b = slab.add(name + ".b", {s.c_out});
}

void Conv1d::init(ParamSlab& slab, std::mt19937_64& rng) const {
  const double bound = torch_default_bound(s.c_in * s.k);
  fill_uniform(slab.value(w), bound, rng);
  fill_uniform(slab.value(b), bound, rng);
}

void Conv1d::forward(const SeqView& y, const CSeqView& x, const ParamView& p, Epilogue e) const {
  assert(x.C == s.c_in && y.C == s.c_out && x.B == y.B);
  assert(y.T == s.out_frames(x.T));
  assert(s.margin() == 0 || x.margin >= s.margin());
  const int T = y.T, k = s.k, ci = s.c_in, co = s.c_out;
  const float* wp = p.p(w);
  const Eigen::Map<const Eigen::VectorXf> bias(p.p(b), co);
  // With d = 1 (or k = 1) one GEMM over the overlapping k·C_in-row view does all taps.
  const bool one_gemm = s.dilation == 1 || k == 1;
  for (int bi = 0; bi < x.B; ++bi) {
    MapMat Y = frames(y, bi, 0, co, T);
    if (e != Epilogue::accumulate) Y.colwise() = bias;
    if (one_gemm) {
      const CMapRowMat W(wp, co, long(k) * ci, Stride(long(k) * ci));
      Y.noalias() += W * frames(x, bi, -s.pad_left, long(k) * ci, T, s.stride);
    } else {
      for (int j = 0; j < k; ++j)
        Y.noalias() += tap(wp, co, k, ci, j) * frames(x, bi, j * s.dilation - s.pad_left, ci, T, s.stride);
    }
    if (e == Epilogue::accumulate) Y.colwise() += bias;
    if (e == Epilogue::elu) elu_forward(Y.data(), Y.data(), std::size_t(T) * co);
  }
}

void Conv1d::backward(const SeqView* dx, const CSeqView& dy, const CSeqView& x, const ParamView& p) const {
  assert(x.C == s.c_in && dy.C == s.c_out && x.B == dy.B && dy.T == s.out_frames(x.T));
  assert(s.margin() == 0 || x.margin >= s.margin());
  assert(!dx || (dx->C == s.c_in && dx->B == x.B && dx->T == x.T && (s.margin() == 0 || dx->margin >= s.margin())));
  const int T = dy.T, k = s.k, ci = s.c_in, co = s.c_out;
  const float* wp = p.p(w);
  float* dwp = p.g(w);
  Eigen::Map<Eigen::VectorXf> db(p.g(b), co);
  const bool one_gemm = s.dilation == 1 || k == 1;
  for (int bi = 0; bi < x.B; ++bi) {
    const CMapMat dY = frames(dy, bi, 0, co, T);
    add_column_sum(db, dY);
    if (one_gemm) {
      MapRowMat dW(dwp, co, long(k) * ci, Stride(long(k) * ci));
      dW.noalias() += dY * frames(x, bi, -s.pad_left, long(k) * ci, T, s.stride).transpose();
    } else {
      for (int j = 0; j < k; ++j) {
        MapRowMat dWj = tap(dwp, co, k, ci, j);
        dWj.noalias() += dY * frames(x, bi, j * s.dilation - s.pad_left, ci, T, s.stride).transpose();
      }
    }
    if (dx) {
      // The transpose of each tap's product: dx[s·t + d·j − pad_left] += w_jᵀ dy[t].
      for (int j = 0; j < k; ++j) {
        MapMat dX = frames(*dx, bi, j * s.dilation - s.pad_left, ci, T, s.stride);
        dX.noalias() += tap(wp, co, k, ci, j).transpose() * dY;
      }
    }
  }
}

}  // namespace tessera::quant
