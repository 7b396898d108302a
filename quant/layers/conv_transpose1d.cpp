// conv_transpose1d.cpp — ConvTranspose1d by output phases: per phase and tap one GEMM.
// B batch, C channels, T frames, k taps, s stride, p padding.
#include "quant/layers/conv_transpose1d.h"

#include <algorithm>
#include <cassert>
#include <vector>

#include "audio/error.h"
#include "quant/layers/gemm.h"
#include "quant/layers/init.h"

namespace tessera::quant {

using namespace gemm;

namespace {

// Floor division for a possibly negative numerator and a positive divisor.
int floor_div(int a, int b) { return a >= 0 ? a / b : -((-a + b - 1) / b); }

// Calls f(r, j, q, n) for every phase r and tap j of that phase: output frames s·m + r,
// m ∈ [0, n), receive w_j · x[m + q].
template <class F>
void for_each_tap(const ConvTranspose1dShape& s, int t_out, F&& f) {
  for (int r = 0; r < s.stride && r < t_out; ++r) {
    const int n = (t_out - r + s.stride - 1) / s.stride;
    for (int j = 0; j < s.k; ++j) {
      const int num = r + s.pad - j;
      if (((num % s.stride) + s.stride) % s.stride != 0) continue;
      f(r, j, num / s.stride, n);
    }
  }
}

// Phase r's output frames of an interleaved batch ([T][B][C]) are runs of B·C floats, s·B
// frames apart: no single GEMM operand. Its input frames m + q of all items, though, are one
// contiguous block of n·B frames. So the phase's product for the whole batch goes to a
// contiguous C_out × n·B buffer (one GEMM per tap with n·B columns, weights packed once
// instead of once per item) that is then copied run by run into place; backward gathers
// the phase's output gradient the same way. Per thread, it grows once to the largest phase.
thread_local std::vector<float> phase_buffer;

MapMat phase_matrix(int rows, long cols) {
  const std::size_t size = std::size_t(rows) * std::size_t(cols);
  if (phase_buffer.size() < size) phase_buffer.resize(size);
  return {phase_buffer.data(), rows, cols, Stride(rows)};
}

bool collapsible(const CSeqView& x, const CSeqView& y) { return x.interleaved() && y.interleaved() && x.B == y.B; }

}  // namespace

// Phase r reads input frames m + q, q = (r + p − j)/s, m < n_r: at least −⌈(k − 1 − p)/s⌉
// and at most T_in − 1 + ⌊(k − 1 − p + output_padding)/s⌋.
int ConvTranspose1dShape::margin() const {
  const int left = -floor_div(pad - (k - 1), stride);
  const int right = floor_div(k - 1 - pad + output_padding, stride);
  return std::max({0, left, right});
}

ConvTranspose1d::ConvTranspose1d(ParamSlab& slab, const std::string& name, const ConvTranspose1dShape& shape)
    : s(shape) {
  if (s.c_in < 1 || s.c_out < 1 || s.k < 1 || s.stride < 1 || s.pad < 0 || s.output_padding < 0 ||
      s.output_padding >= s.stride)
    throw Error("conv_transpose1d '" + name + "': invalid shape (k " + std::to_string(s.k) + ", stride " +
                std::to_string(s.stride) + ", pad " + std::to_string(s.pad) + ", output_padding " +
                std::to_string(s.output_padding) + ")");
  w = slab.add(name + ".w", {s.c_out, s.k, s.c_in});
  b = slab.add(name + ".b", {s.c_out});
}

void ConvTranspose1d::init(ParamSlab& slab, std::mt19937_64& rng) const {
  const double bound = torch_default_bound(s.c_out * s.k);
  fill_uniform(slab.value(w), bound, rng);
  fill_uniform(slab.value(b), bound, rng);
}

void ConvTranspose1d::forward(const SeqView& y, const CSeqView& x, const ParamView& p) const {
  assert(x.C == s.c_in && y.C == s.c_out && x.B == y.B && y.T == s.out_frames(x.T));
  assert(x.margin >= s.margin());
  const int k = s.k, ci = s.c_in, co = s.c_out, st = s.stride;
  const float* wp = p.p(w);
  const Eigen::Map<const Eigen::VectorXf> bias(p.p(b), co);
  if (collapsible(x, y)) {
    const int B = x.B;
    const long run = long(B) * co;
    for (int r = 0; r < st && r < y.T; ++r) {
      const int n = (y.T - r + st - 1) / st;
      MapMat P = phase_matrix(co, long(n) * B);
      P.colwise() = bias;
      for_each_tap(s, y.T, [&](int rr, int j, int q, int nn) {
        if (rr == r) add_wx(P, tap(wp, co, k, ci, j), CMapMat(x.frame(0, q), ci, long(nn) * B, Stride(ci)));
      });
      for (int m = 0; m < n; ++m) std::copy_n(P.data() + m * run, run, y.frame(0, st * m + r));
    }
    return;
  }
  for (int bi = 0; bi < x.B; ++bi) {
    frames(y, bi, 0, co, y.T).colwise() = bias;
    for_each_tap(s, y.T, [&](int r, int j, int q, int n) {
      MapMat Y = frames(y, bi, r, co, n, st);
      add_wx(Y, tap(wp, co, k, ci, j), frames(x, bi, q, ci, n));
    });
  }
}

void ConvTranspose1d::backward(const SeqView* dx, const CSeqView& dy, const CSeqView& x, const ParamView& p) const {
  assert(x.C == s.c_in && dy.C == s.c_out && x.B == dy.B && dy.T == s.out_frames(x.T));
  assert(x.margin >= s.margin());
  assert(!dx || (dx->C == s.c_in && dx->B == x.B && dx->T == x.T && dx->margin >= s.margin()));
  const int k = s.k, ci = s.c_in, co = s.c_out, st = s.stride;
  const float* wp = p.p(w);
  float* dwp = p.g(w);
  Eigen::Map<Eigen::VectorXf> db(p.g(b), co);
  if (collapsible(x, dy) && (!dx || dx->interleaved())) {
    const int B = x.B;
    const long run = long(B) * co;
    add_column_sum(db, CMapMat(dy.frame(0, 0), co, long(dy.T) * B, Stride(co)));
    for (int r = 0; r < st && r < dy.T; ++r) {
      const int n = (dy.T - r + st - 1) / st;
      MapMat G = phase_matrix(co, long(n) * B);
      for (int m = 0; m < n; ++m) std::copy_n(dy.frame(0, st * m + r), run, G.data() + m * run);
      for_each_tap(s, dy.T, [&](int rr, int j, int q, int nn) {
        if (rr != r) return;
        const CMapMat X(x.frame(0, q), ci, long(nn) * B, Stride(ci)), cG(G.data(), co, G.cols(), Stride(co));
        add_dyxt(tap(dwp, co, k, ci, j), cG, X);
        if (dx) add_wtx(MapMat(dx->frame(0, q), ci, long(nn) * B, Stride(ci)), tap(wp, co, k, ci, j), cG);
      });
    }
    return;
  }
  for (int bi = 0; bi < x.B; ++bi) {
    add_column_sum(db, frames(dy, bi, 0, co, dy.T));
    for_each_tap(s, dy.T, [&](int r, int j, int q, int n) {
      const CMapMat dY = frames(dy, bi, r, co, n, st);
      add_dyxt(tap(dwp, co, k, ci, j), dY, frames(x, bi, q, ci, n));
      if (dx) add_wtx(frames(*dx, bi, q, ci, n), tap(wp, co, k, ci, j), dY);
    });
  }
}

}  // namespace tessera::quant
