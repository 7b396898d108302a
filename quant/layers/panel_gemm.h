// panel_gemm.h — the weight-times-frames product of the convolutions with an AVX-512
// register-blocked kernel: y(:, n) += Σ_j W_j · x(:, n·col_step + j·tap_step), n < cols.
// R rows (output channels), D depth (input channels per tap), J taps.
//
// Why not Eigen here: Eigen 3.4's AVX-512 kernel holds a 48 x 4 block of y in 12
// registers and packs both operands on every call; this one holds 32 x 12 in 24 registers,
// packs W once per call into 32-row panels (GotoBLAS layering, Goto & van de Geijn 2008,
// "Anatomy of high-performance matrix multiplication") and reads the frames in place,
// broadcasting each value of a 12-column strip to the 24 accumulators.
// Each element of y is one chain of fused multiply-adds, started from y's old value, over
// the taps and depth in order: its rounding does not depend on how the rows and columns
// are split, so results stay the same whatever the chunk or thread count.
//
// Layouts: W_j(r, d) = w[r·row_stride + j·tap_stride + d·depth_stride];
// x_j(d, n) = x[n·col_step + j·tap_step + d·depth_step]; y(r, n) = y[r + n·ldy].
// The three conv products map onto it: forward y += W·x (W the weights), input gradient
// dx += Wᵀ·dy (W the transposed weights), weight gradient dWᵀ += x·dyᵀ (W the frames).
// The kernel needs AVX-512F, checked at run time (x86-64 with GCC or clang); available()
// says whether it runs, and the callers fall back to Eigen otherwise.
#pragma once
#include <cstddef>

namespace tessera::quant::panel_gemm {

struct Weights {
  const float* w;
  long row_stride, tap_stride, depth_stride;
  int rows, depth, taps;
};

// True when the kernel runs here: an x86-64 build, a CPU with AVX-512F, and the
// environment does not say TESSERA_PANEL_GEMM=0.
bool available();

struct Frames {
  const float* x;
  long col_step, tap_step = 0, depth_step = 1;
};

// y(:, n) += Σ_j W_j · x_j(:, n) for n < cols. The frames must have depth_step 1 (depth
// contiguous: forward, input gradient) or col_step 1 (columns contiguous: weight gradient). Allocation-free after the first call of a
// given size on a thread (per-thread packing buffers).
void add_product(float* y, long ldy, const Weights& w, const Frames& x, int cols);

}  // namespace tessera::quant::panel_gemm
