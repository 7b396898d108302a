// panel_gemm.cpp — packing and the 32 x 12 AVX-512 micro-kernel of panel_gemm.h.
// R rows, K = J·D reduction length, N columns; MR = 32 rows (2 vectors), NR = 12 columns.
#include "quant/layers/panel_gemm.h"

#include <algorithm>
#include <array>
#include <cassert>
#include <utility>

#include <cstdlib>
#include <string_view>

#include "quant/float_buffer.h"

// The kernel is compiled for AVX-512F whatever the build's flags and chosen at run time,
// so portable builds (and CI) run it too on CPUs that have it.
#if defined(__x86_64__) && (defined(__GNUC__) || defined(__clang__))
#define TESSERA_PANEL_GEMM 1
#include <immintrin.h>
#define TESSERA_AVX512 __attribute__((target("avx512f")))
#endif

namespace tessera::quant::panel_gemm {

#if defined(TESSERA_PANEL_GEMM)

namespace {

constexpr int MR = 32, NR = 12;

// Per thread: W packed as [panel][k][MR] (rows past R are zeros), and one strip of x
// packed as [k][NR] (columns past N are zeros).
thread_local FloatBuffer packed_w, packed_x;

void pack_weights(const Weights& w, int K) {
  const int panels = (w.rows + MR - 1) / MR;
  const std::size_t need = std::size_t(panels) * K * MR;
  if (packed_w.size() < need) packed_w.resize(need);
  float* out = packed_w.data();
  for (int p = 0; p < panels; ++p) {
    const int r0 = p * MR, rn = std::min(MR, w.rows - r0);
    for (int j = 0; j < w.taps; ++j)
      for (int d = 0; d < w.depth; ++d, out += MR) {
        const float* src = w.w + long(r0) * w.row_stride + long(j) * w.tap_stride + long(d) * w.depth_stride;
        if (w.row_stride == 1) {
          std::copy_n(src, rn, out);
        } else {
          for (int r = 0; r < rn; ++r) out[r] = src[long(r) * w.row_stride];
        }
        std::fill(out + rn, out + MR, 0.0f);
      }
  }
}

// Strip of columns n0..n0+nn of x (all taps and depth) as [k][NR].
void pack_strip(const Weights& w, const Frames& f, int n0, int nn) {
  const int K = w.taps * w.depth;
  if (packed_x.size() < std::size_t(K) * NR) packed_x.resize(std::size_t(K) * NR);
  float* out = packed_x.data();
  if (f.depth_step == 1) {  // columns are contiguous runs of depth: 12 read streams, one write stream
    const float* src[NR];
    for (int j = 0; j < w.taps; ++j) {
      for (int n = 0; n < nn; ++n) src[n] = f.x + long(n0 + n) * f.col_step + long(j) * f.tap_step;
      float* dst = out + std::size_t(j) * w.depth * NR;
      if (nn == NR) {
        for (int d = 0; d < w.depth; ++d, dst += NR)
          for (int n = 0; n < NR; ++n) dst[n] = src[n][d];
      } else {
        for (int d = 0; d < w.depth; ++d, dst += NR)
          for (int n = 0; n < nn; ++n) dst[n] = src[n][d];
      }
    }
  } else {  // depth is the far axis (x·dyᵀ): read across the strip's columns, row by row
    for (int j = 0; j < w.taps; ++j)
      for (int d = 0; d < w.depth; ++d) {
        const float* src = f.x + long(n0) * f.col_step + long(j) * f.tap_step + long(d) * f.depth_step;
        float* dst = out + (std::size_t(j) * w.depth + d) * NR;
        for (int n = 0; n < nn; ++n) dst[n] = src[long(n) * f.col_step];
      }
  }
  if (nn < NR)
    for (int k = 0; k < K; ++k) std::fill(out + std::size_t(k) * NR + nn, out + std::size_t(k + 1) * NR, 0.0f);
}

// y[r + n·ldy] (r < 32 within the masks, n < nn) += Σ_k a[k][r] · b[k][n].
template <int NN>
TESSERA_AVX512 void micro_kernel(const float* a, const float* b, int K, float* y, long ldy, __mmask16 m0, __mmask16 m1) {
  __m512 c0[NN], c1[NN];
  for (int n = 0; n < NN; ++n) {
    c0[n] = _mm512_maskz_loadu_ps(m0, y + n * ldy);
    c1[n] = _mm512_maskz_loadu_ps(m1, y + n * ldy + 16);
  }
  for (int k = 0; k < K; ++k, a += MR, b += NR) {
    // Unaligned loads: FloatBuffer is 16-byte aligned in portable builds (same speed when aligned).
    const __m512 a0 = _mm512_loadu_ps(a), a1 = _mm512_loadu_ps(a + 16);
    for (int n = 0; n < NN; ++n) {
      const __m512 bn = _mm512_set1_ps(b[n]);
      c0[n] = _mm512_fmadd_ps(a0, bn, c0[n]);
      c1[n] = _mm512_fmadd_ps(a1, bn, c1[n]);
    }
  }
  for (int n = 0; n < NN; ++n) {
    _mm512_mask_storeu_ps(y + n * ldy, m0, c0[n]);
    _mm512_mask_storeu_ps(y + n * ldy + 16, m1, c1[n]);
  }
}

using Kernel = void (*)(const float*, const float*, int, float*, long, __mmask16, __mmask16);
template <int... I>
constexpr auto kernel_table(std::integer_sequence<int, I...>) {
  return std::array<Kernel, sizeof...(I)>{&micro_kernel<I + 1>...};
}
constexpr auto kKernels = kernel_table(std::make_integer_sequence<int, NR>{});

__mmask16 row_mask(int rows) { return rows >= 16 ? __mmask16(0xFFFF) : __mmask16((1u << std::max(rows, 0)) - 1); }

}  // namespace

// TESSERA_PANEL_GEMM=0 in the environment turns the kernel off (Eigen everywhere): for
// side-by-side timings and for testing the fallback on an AVX-512 machine.
bool available() {
  static const bool yes = [] {
    const char* e = std::getenv("TESSERA_PANEL_GEMM");
    if (e && std::string_view(e) == "0") return false;
    __builtin_cpu_init();
    return bool(__builtin_cpu_supports("avx512f"));
  }();
  return yes;
}

void add_product(float* y, long ldy, const Weights& w, const Frames& x, int cols) {
  if (cols <= 0 || w.rows <= 0) return;
  const int K = w.taps * w.depth;
  if (K == 0) return;
  pack_weights(w, K);
  const int panels = (w.rows + MR - 1) / MR;
  for (int n0 = 0; n0 < cols; n0 += NR) {
    const int nn = std::min(NR, cols - n0);
    pack_strip(w, x, n0, nn);
    const Kernel kern = kKernels[std::size_t(nn - 1)];
    for (int p = 0; p < panels; ++p) {
      const int rn = std::min(MR, w.rows - p * MR);
      kern(packed_w.data() + std::size_t(p) * K * MR, packed_x.data(), K, y + long(n0) * ldy + p * MR, ldy,
           row_mask(rn), row_mask(rn - 16));
    }
  }
}

#else

bool available() { return false; }
void add_product(float*, long, const Weights&, const Frames&, int) {
  assert(false && "panel_gemm::add_product without AVX-512: check available() first");
}

#endif

}  // namespace tessera::quant::panel_gemm
