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

// Per thread: W packed as [panel][k][MR] (rows past R are zeros).
thread_local FloatBuffer packed_w;

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

// y[r + n·ldy] (r < 32 within the masks, n < NN) += Σ_j Σ_d a[j][d][r] · b_j(d, n), read
// straight from the frames (no packing): in column mode (kRows false) b_j(d, n) =
// x[j·tap_step + n·step + d], depth contiguous, the columns `step` apart, addressed from
// four base pointers as p[0], p[step], p[2·step] (x86 scales 4 and 8 of one index
// register); in row mode b_j(d, n) = x[j·tap_step + d·step + n], a strip's 12 columns
// side by side. One fused multiply-add chain per element, from y's old value, in the
// order of j then d.
template <int NN, bool kRows>
TESSERA_AVX512 void micro_kernel(const float* a, int depth, int taps, const float* x, long step, long tap_step,
                                 float* y, long ldy, __mmask16 m0, __mmask16 m1) {
  __m512 c0[NN], c1[NN];
  for (int n = 0; n < NN; ++n) {
    c0[n] = _mm512_maskz_loadu_ps(m0, y + n * ldy);
    c1[n] = _mm512_maskz_loadu_ps(m1, y + n * ldy + 16);
  }
  for (int j = 0; j < taps; ++j) {
    const float* xb = x + j * tap_step;
    if constexpr (kRows) {
      for (int d = 0; d < depth; ++d, a += MR, xb += step) {
        // Unaligned loads: FloatBuffer is 16-byte aligned in portable builds (same speed when aligned).
        const __m512 a0 = _mm512_loadu_ps(a), a1 = _mm512_loadu_ps(a + 16);
        for (int n = 0; n < NN; ++n) {
          const __m512 bn = _mm512_set1_ps(xb[n]);
          c0[n] = _mm512_fmadd_ps(a0, bn, c0[n]);
          c1[n] = _mm512_fmadd_ps(a1, bn, c1[n]);
        }
      }
    } else {
      const float* p[4] = {xb, xb + 3 * step, xb + 6 * step, xb + 9 * step};
      for (int d = 0; d < depth; ++d, a += MR) {
        const __m512 a0 = _mm512_loadu_ps(a), a1 = _mm512_loadu_ps(a + 16);
        for (int n = 0; n < NN; ++n) {
          const __m512 bn = _mm512_set1_ps(p[n / 3][(n % 3) * step + d]);
          c0[n] = _mm512_fmadd_ps(a0, bn, c0[n]);
          c1[n] = _mm512_fmadd_ps(a1, bn, c1[n]);
        }
      }
    }
  }
  for (int n = 0; n < NN; ++n) {
    _mm512_mask_storeu_ps(y + n * ldy, m0, c0[n]);
    _mm512_mask_storeu_ps(y + n * ldy + 16, m1, c1[n]);
  }
}

using Kernel = void (*)(const float*, int, int, const float*, long, long, float*, long, __mmask16, __mmask16);
template <bool kRows, int... I>
constexpr auto kernel_table(std::integer_sequence<int, I...>) {
  return std::array<Kernel, sizeof...(I)>{&micro_kernel<I + 1, kRows>...};
}
constexpr auto kColumnKernels = kernel_table<false>(std::make_integer_sequence<int, NR>{});
constexpr auto kRowKernels = kernel_table<true>(std::make_integer_sequence<int, NR>{});

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
  assert(x.depth_step == 1 || x.col_step == 1);
  const bool rows_mode = x.depth_step != 1;
  pack_weights(w, K);
  const int panels = (w.rows + MR - 1) / MR;
  for (int n0 = 0; n0 < cols; n0 += NR) {
    const int nn = std::min(NR, cols - n0);
    const Kernel kern = (rows_mode ? kRowKernels : kColumnKernels)[std::size_t(nn - 1)];
    const float* strip = x.x + long(n0) * x.col_step;
    const long step = rows_mode ? x.depth_step : x.col_step;
    for (int p = 0; p < panels; ++p) {
      const int rn = std::min(MR, w.rows - p * MR);
      kern(packed_w.data() + std::size_t(p) * K * MR, w.depth, w.taps, strip, step, x.tap_step,
           y + long(n0) * ldy + p * MR, ldy, row_mask(rn), row_mask(rn - 16));
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
