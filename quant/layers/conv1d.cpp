// conv1d.cpp — Conv1d forward/backward: per item, strided frame views times weight blocks.
// B batch, C channels, T frames, k taps.
#include "quant/layers/conv1d.h"

#include <algorithm>
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

namespace {

// An interleaved batch [T][B][C] is, for a stride-1 conv, one sequence of B·T frames
// (frame n = t·B + b) convolved with dilation d·B and padding pad·B: each tap becomes a
// single GEMM over the whole batch, with the weights packed once instead of per item.
bool collapsible(const Conv1dShape& s, const CSeqView& a, const CSeqView& b) {
  return s.stride == 1 && a.interleaved() && b.interleaved() && a.B == b.B;
}
template <class F>
SeqViewT<F> as_one_sequence(const SeqViewT<F>& v) {
  return {v.data, 1, v.C, v.B * v.T, 0, v.margin * v.B, 1};
}
Conv1dShape widened(Conv1dShape s, int B) {
  s.dilation *= B, s.pad_left *= B, s.pad_right *= B;
  return s;
}

// Tap GEMMs run over blocks of this many output frames, so that a block of y (or dx)
// stays in L2 while all k taps add into it (measured +10–25 % over whole-batch GEMMs
// at C = 256 on a 1 MB-L2 core; 400–800 frames did best, 768 = 0.75 MB of y at C = 256).
constexpr int kFrameBlock = 768;

// The block length for T output frames: T split into equal blocks of at most kFrameBlock,
// rounded up to whole 16-float packets. Fixed blocks of 768 left short tails (1600 frames
// → 768 + 768 + 64), and each block packs the weights again for its few columns.
int frame_block(int T) {
  const int blocks = std::max(1, (T + kFrameBlock - 1) / kFrameBlock);
  return ((T + blocks - 1) / blocks + 15) / 16 * 16;
}

// y = epilogue(conv(x) + bias), item by item, block by block (the ELU runs on each
// block while it is still in cache).
void conv_forward(const Conv1dShape& s, const SeqView& y, const CSeqView& x, const float* wp, const float* bp,
                  Epilogue e) {
  const bool accumulate = e == Epilogue::accumulate;
  const int k = s.k, ci = s.c_in, co = s.c_out;
  const Eigen::Map<const Eigen::VectorXf> bias(bp, co);
  // With d = 1 (or k = 1) and contiguous frames, one GEMM over the overlapping
  // k·C_in-row view of x does all taps.
  const bool one_gemm = (s.dilation == 1 || k == 1) && x.tstride == 1;
  const int block = frame_block(y.T);
  for (int bi = 0; bi < x.B; ++bi) {
    for (int t0 = 0; t0 < y.T; t0 += block) {
      const int n = std::min(block, y.T - t0), u0 = t0 * s.stride - s.pad_left;
      MapMat Y = frames(y, bi, t0, co, n);
      if (!accumulate) Y.colwise() = bias;
      if (panel_gemm::available()) {  // all taps in one pass over Y
        const long fs = x.tstride * x.C;
        panel_gemm::add_product(Y.data(), Y.outerStride(), {wp, long(k) * ci, ci, 1, co, ci, k},
                                {x.frame(bi, u0), s.stride * fs, s.dilation * fs}, n);
      } else if (one_gemm) {
        const CMapRowMat W(wp, co, long(k) * ci, Stride(long(k) * ci));
        add_product(Y, W, frames(x, bi, u0, long(k) * ci, n, s.stride));
      } else {
        for (int j = 0; j < k; ++j)
          add_product(Y, tap(wp, co, k, ci, j), frames(x, bi, u0 + j * s.dilation, ci, n, s.stride));
      }
      if (accumulate) Y.colwise() += bias;
      if (e == Epilogue::elu) {
        if (y.tstride == 1)
          elu_forward(Y.data(), Y.data(), std::size_t(n) * co);
        else
          for (int t = 0; t < n; ++t) elu_forward(Y.col(t).data(), Y.col(t).data(), std::size_t(co));
      }
    }
  }
}

void conv_backward(const Conv1dShape& s, const SeqView* dx, const CSeqView& dy, const CSeqView& x, const float* wp,
                   float* dwp, float* dbp) {
  const int k = s.k, ci = s.c_in, co = s.c_out;
  Eigen::Map<Eigen::VectorXf> db(dbp, co);
  const bool one_gemm = (s.dilation == 1 || k == 1) && x.tstride == 1;
  const int block = frame_block(dy.T);
  for (int bi = 0; bi < x.B; ++bi) {
    for (int t0 = 0; t0 < dy.T; t0 += block) {
      const int n = std::min(block, dy.T - t0), u0 = t0 * s.stride - s.pad_left;
      const CMapMat dY = frames(dy, bi, t0, co, n);
      add_column_sum(db, dY);
      if (one_gemm) {
        MapRowMat dW(dwp, co, long(k) * ci, Stride(long(k) * ci));
        add_dyxt(dW, dY, frames(x, bi, u0, long(k) * ci, n, s.stride));
      } else {
        for (int j = 0; j < k; ++j) {
          add_dyxt(tap(dwp, co, k, ci, j), dY, frames(x, bi, u0 + j * s.dilation, ci, n, s.stride));
        }
      }
      if (dx) {
        // The transpose of each tap's product: dx[s·t + d·j − pad_left] += w_jᵀ dy[t].
        for (int j = 0; j < k; ++j) {
          add_wtx(frames(*dx, bi, u0 + j * s.dilation, ci, n, s.stride), tap(wp, co, k, ci, j), dY);
        }
      }
    }
  }
}

}  // namespace

void Conv1d::forward(const SeqView& y, const CSeqView& x, const ParamView& p, Epilogue e) const {
  assert(x.C == s.c_in && y.C == s.c_out && x.B == y.B);
  assert(y.T == s.out_frames(x.T));
  assert(s.margin() == 0 || x.margin >= s.margin());
  if (collapsible(s, x, y))
    conv_forward(widened(s, x.B), as_one_sequence(y), as_one_sequence(x), p.p(w), p.p(b), e);
  else
    conv_forward(s, y, x, p.p(w), p.p(b), e);
}

void Conv1d::backward(const SeqView* dx, const CSeqView& dy, const CSeqView& x, const ParamView& p) const {
  assert(x.C == s.c_in && dy.C == s.c_out && x.B == dy.B && dy.T == s.out_frames(x.T));
  assert(s.margin() == 0 || x.margin >= s.margin());
  assert(!dx || (dx->C == s.c_in && dx->B == x.B && dx->T == x.T && (s.margin() == 0 || dx->margin >= s.margin())));
  if (collapsible(s, x, dy) && (!dx || dx->interleaved())) {
    const SeqView dx1 = dx ? as_one_sequence(*dx) : SeqView{};
    conv_backward(widened(s, x.B), dx ? &dx1 : nullptr, as_one_sequence(dy), as_one_sequence(x), p.p(w), p.g(w),
                  p.g(b));
  } else {
    conv_backward(s, dx, dy, x, p.p(w), p.g(w), p.g(b));
  }
}

}  // namespace tessera::quant
