// panel_gemm_test.cpp — the three conv products (gemm.h: add_wx, add_wtx, add_dyxt) against
// a double-precision reference on odd shapes, and the panel kernel's promise that an
// element's rounding does not depend on how columns and rows are split. On CPUs without
// AVX-512 (or with TESSERA_PANEL_GEMM=0) the same checks run on the Eigen fallback, where
// split invariance is not promised and is skipped.
#include <doctest/doctest.h>

#include <cmath>
#include <random>
#include <vector>

#include "quant/layers/gemm.h"

using namespace tessera::quant;
using namespace tessera::quant::gemm;

namespace {

FloatBuffer normal(std::size_t n, std::mt19937& rng) {
  std::normal_distribution<float> g;
  FloatBuffer v(n);
  for (float& x : v) x = g(rng);
  return v;
}

// Worst |got − ref| relative to the reference's scale: sqrt(depth) for unit normals.
double worst(const FloatBuffer& got, const std::vector<double>& ref, int depth) {
  double w = 0;
  for (std::size_t i = 0; i < got.size(); ++i) w = std::max(w, std::fabs(got[i] - ref[i]));
  return w / std::sqrt(double(depth));
}

}  // namespace

TEST_CASE("conv products match a double-precision reference on odd shapes") {
  std::mt19937 rng(11);
  // Float32 sums of `depth` unit-normal products: the error grows like sqrt(depth)·eps
  // (common practice: Higham 2002, "Accuracy and Stability of Numerical Algorithms", §3.1).
  const double tol = 1e-5;
  for (int R : {1, 5, 16, 17, 32, 33, 80, 256})
    for (int D : {1, 7, 80, 129})
      for (int N : {1, 11, 12, 13, 40}) {
        CAPTURE(R);
        CAPTURE(D);
        CAPTURE(N);
        const FloatBuffer w = normal(std::size_t(R) * D, rng), x = normal(std::size_t(D) * N, rng);
        const FloatBuffer dy = normal(std::size_t(R) * N, rng), xt = normal(std::size_t(D) * N, rng);
        FloatBuffer y = normal(std::size_t(R) * N, rng), dx = normal(std::size_t(D) * N, rng),
                    dw = normal(std::size_t(R) * D, rng);
        std::vector<double> ry(y.begin(), y.end()), rdx(dx.begin(), dx.end()), rdw(dw.begin(), dw.end());
        for (int n = 0; n < N; ++n)
          for (int r = 0; r < R; ++r)
            for (int d = 0; d < D; ++d) {
              ry[std::size_t(n) * R + r] += double(w[std::size_t(r) * D + d]) * x[std::size_t(n) * D + d];
              rdx[std::size_t(n) * D + d] += double(w[std::size_t(r) * D + d]) * dy[std::size_t(n) * R + r];
              rdw[std::size_t(r) * D + d] += double(dy[std::size_t(n) * R + r]) * xt[std::size_t(n) * D + d];
            }
        add_wx(MapMat(y.data(), R, N, Stride(R)), CMapRowMat(w.data(), R, D, Stride(D)), CMapMat(x.data(), D, N, Stride(D)));
        add_wtx(MapMat(dx.data(), D, N, Stride(D)), CMapRowMat(w.data(), R, D, Stride(D)),
                CMapMat(dy.data(), R, N, Stride(R)));
        add_dyxt(MapRowMat(dw.data(), R, D, Stride(D)), CMapMat(dy.data(), R, N, Stride(R)),
                 CMapMat(xt.data(), D, N, Stride(D)));
        CHECK(worst(y, ry, D) < tol);
        CHECK(worst(dx, rdx, R) < tol);
        CHECK(worst(dw, rdw, N) < tol);
      }
}

TEST_CASE("panel kernel: taps, strides and dilation as a convolution") {
  std::mt19937 rng(12);
  const int co = 48, ci = 40, k = 4, stride = 2, dilation = 3, N = 29;
  const int frames = (N - 1) * stride + (k - 1) * dilation + 1;
  const FloatBuffer w = normal(std::size_t(co) * k * ci, rng), x = normal(std::size_t(frames) * ci, rng);
  FloatBuffer y = normal(std::size_t(co) * N, rng);
  std::vector<double> ref(y.begin(), y.end());
  // y[:, n] += Σ_j W_j x[:, stride·n + dilation·j] (the definition of a strided, dilated
  // convolution, as torch.nn.functional.conv1d documents it), W stored (co, k, ci).
  for (int n = 0; n < N; ++n)
    for (int o = 0; o < co; ++o)
      for (int j = 0; j < k; ++j)
        for (int c = 0; c < ci; ++c)
          ref[std::size_t(n) * co + o] += double(w[(std::size_t(o) * k + j) * ci + c]) *
                                          x[std::size_t(stride * n + dilation * j) * ci + c];
  if (!panel_gemm::available()) return;  // the Eigen path does taps one GEMM at a time (conv1d.cpp)
  panel_gemm::add_product(y.data(), co, {w.data(), long(k) * ci, ci, 1, co, ci, k},
                          {x.data(), long(stride) * ci, long(dilation) * ci}, N);
  CHECK(worst(y, ref, k * ci) < 1e-5);
}

TEST_CASE("panel kernel: the same bits however columns and rows are split") {
  if (!panel_gemm::available()) return;  // a promise of the kernel only
  std::mt19937 rng(13);
  const int R = 80, D = 256, N = 100;
  const FloatBuffer w = normal(std::size_t(R) * D, rng), x = normal(std::size_t(D) * N, rng),
                    y0 = normal(std::size_t(R) * N, rng);
  FloatBuffer whole = y0;
  panel_gemm::add_product(whole.data(), R, {w.data(), D, 0, 1, R, D, 1}, {x.data(), D}, N);
  for (int piece : {1, 7, 12, 13, 50}) {
    CAPTURE(piece);
    FloatBuffer split = y0;
    for (int n0 = 0; n0 < N; n0 += piece)  // columns in pieces
      panel_gemm::add_product(split.data() + std::size_t(n0) * R, R, {w.data(), D, 0, 1, R, D, 1},
                              {x.data() + std::size_t(n0) * D, D}, std::min(piece, N - n0));
    CHECK(split == whole);
  }
  FloatBuffer rows = y0;  // rows 0..16 and 16..80: a different panel cut
  panel_gemm::add_product(rows.data(), R, {w.data(), D, 0, 1, 16, D, 1}, {x.data(), D}, N);
  panel_gemm::add_product(rows.data() + 16, R, {w.data() + 16 * D, D, 0, 1, R - 16, D, 1}, {x.data(), D}, N);
  CHECK(rows == whole);
}
