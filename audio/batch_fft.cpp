// batch_fft.cpp — radix-4 real FFT across SIMD lanes, KissFFT fallback, and the frame/bin transposes.
// W lanes, N = n (FFT size), m = N/2 complex points, F bins (N/2 + 1).
// A complex element e of a batch is the vector pair x[2e] (re), x[2e + 1] (im).
#include "audio/batch_fft.h"

#include <algorithm>
#include <cassert>
#include <cstring>
#include <numbers>
#include <string>
#include <utility>

#include "audio/error.h"
#include "audio/stft.h"

namespace tessera::audio {

namespace {

constexpr int W = kFftLanes;

bool is_power_of_two(int n) { return n > 0 && (n & (n - 1)) == 0; }

// --- complex butterflies on vector pairs -------------------------------------------------------

// Radix-4 decimation-in-frequency pass over s = 4q elements (two radix-2 stages merged):
// with x0..x3 at j, j+q, j+2q, j+3q and t_r = e^{−2πi·r·j/s}:
//   a = x0 + x2, b = x0 − x2, c = x1 + x3, d = −i(x1 − x3)
//   out j: a + c,  j+q: (a − c)·t2,  j+2q: (b + d)·t1,  j+3q: (b − d)·t3
// The outputs stay in radix-2 bit-reversed order. src may equal dst.
void dif4(const LaneVec* src, LaneVec* dst, int q, const float* tw) {
  for (int j = 0; j < q; ++j, tw += 6) {
    const LaneVec* s0 = src + 2 * j;
    const LaneVec *s1 = s0 + 2 * q, *s2 = s0 + 4 * q, *s3 = s0 + 6 * q;
    const LaneVec ar = s0[0] + s2[0], ai = s0[1] + s2[1];
    const LaneVec br = s0[0] - s2[0], bi = s0[1] - s2[1];
    const LaneVec cr = s1[0] + s3[0], ci = s1[1] + s3[1];
    const LaneVec dr = s1[1] - s3[1], di = s3[0] - s1[0];
    const LaneVec e1r = ar - cr, e1i = ai - ci;  // × t2
    const LaneVec e2r = br + dr, e2i = bi + di;  // × t1
    const LaneVec e3r = br - dr, e3i = bi - di;  // × t3
    LaneVec* d0 = dst + 2 * j;
    LaneVec *d1 = d0 + 2 * q, *d2 = d0 + 4 * q, *d3 = d0 + 6 * q;
    d0[0] = ar + cr;
    d0[1] = ai + ci;
    d1[0] = e1r * tw[2] - e1i * tw[3];
    d1[1] = e1r * tw[3] + e1i * tw[2];
    d2[0] = e2r * tw[0] - e2i * tw[1];
    d2[1] = e2r * tw[1] + e2i * tw[0];
    d3[0] = e3r * tw[4] - e3i * tw[5];
    d3[1] = e3r * tw[5] + e3i * tw[4];
  }
}

// Radix-4 decimation-in-time pass, the inverse of dif4 up to a factor 4 (conjugate twiddles u):
//   A = x0, B = x1·u2, C = x2·u1, D = x3·u3
//   out j: (A + B) + (C + D),  j+q: (A − B) + i(C − D),  j+2q: (A + B) − (C + D),  j+3q: (A − B) − i(C − D)
void dit4(LaneVec* x, int q, const float* tw) {
  for (int j = 0; j < q; ++j, tw += 6) {
    LaneVec* p0 = x + 2 * j;
    LaneVec *p1 = p0 + 2 * q, *p2 = p0 + 4 * q, *p3 = p0 + 6 * q;
    const LaneVec Ar = p0[0], Ai = p0[1];
    const LaneVec Br = p1[0] * tw[2] + p1[1] * tw[3], Bi = p1[1] * tw[2] - p1[0] * tw[3];
    const LaneVec Cr = p2[0] * tw[0] + p2[1] * tw[1], Ci = p2[1] * tw[0] - p2[0] * tw[1];
    const LaneVec Dr = p3[0] * tw[4] + p3[1] * tw[5], Di = p3[1] * tw[4] - p3[0] * tw[5];
    const LaneVec sr = Ar + Br, si = Ai + Bi, dr = Ar - Br, di = Ai - Bi;
    const LaneVec tr = Cr + Dr, ti = Ci + Di, ur = Cr - Dr, ui = Ci - Di;
    p0[0] = sr + tr;
    p0[1] = si + ti;
    p2[0] = sr - tr;
    p2[1] = si - ti;
    p1[0] = dr - ui;  // (A − B) + i(C − D)
    p1[1] = di + ur;
    p3[0] = dr + ui;  // (A − B) − i(C − D)
    p3[1] = di - ur;
  }
}

// Radix-4 pass on 4 elements (all twiddles 1).
inline void dif4_leaf(LaneVec* x) {
  const LaneVec ar = x[0] + x[4], ai = x[1] + x[5], br = x[0] - x[4], bi = x[1] - x[5];
  const LaneVec cr = x[2] + x[6], ci = x[3] + x[7], dr = x[3] - x[7], di = x[6] - x[2];
  x[0] = ar + cr;
  x[1] = ai + ci;
  x[2] = ar - cr;
  x[3] = ai - ci;
  x[4] = br + dr;
  x[5] = bi + di;
  x[6] = br - dr;
  x[7] = bi - di;
}

inline void dit4_leaf(LaneVec* x) {
  const LaneVec sr = x[0] + x[2], si = x[1] + x[3], dr = x[0] - x[2], di = x[1] - x[3];
  const LaneVec tr = x[4] + x[6], ti = x[5] + x[7], ur = x[4] - x[6], ui = x[5] - x[7];
  x[0] = sr + tr;
  x[1] = si + ti;
  x[4] = sr - tr;
  x[5] = si - ti;
  x[2] = dr - ui;
  x[3] = di + ur;
  x[6] = dr + ui;
  x[7] = di - ur;
}

inline void radix2(LaneVec* x) {
  const LaneVec ar = x[0], ai = x[1];
  x[0] = ar + x[2];
  x[1] = ai + x[3];
  x[2] = ar - x[2];
  x[3] = ai - x[3];
}

// The last two levels of an 8-element block in registers: dif4 with q = 2 (twiddles 1 and
// t1 = e^{−iπ/4}, t2 = −i, t3 = e^{−3iπ/4}), then four radix-2 butterflies.
inline void dif8_leaf(LaneVec* x) {
  constexpr float c = float(std::numbers::sqrt2 / 2);
  for (int j = 0; j < 2; ++j) {
    LaneVec* p = x + 2 * j;  // elements j, j+2, j+4, j+6
    const LaneVec ar = p[0] + p[8], ai = p[1] + p[9], br = p[0] - p[8], bi = p[1] - p[9];
    const LaneVec cr = p[4] + p[12], ci = p[5] + p[13], dr = p[5] - p[13], di = p[12] - p[4];
    const LaneVec e1r = ar - cr, e1i = ai - ci, e2r = br + dr, e2i = bi + di, e3r = br - dr, e3i = bi - di;
    p[0] = ar + cr;
    p[1] = ai + ci;
    if (j == 0) {
      p[4] = e1r, p[5] = e1i, p[8] = e2r, p[9] = e2i, p[12] = e3r, p[13] = e3i;
    } else {
      p[4] = e1i, p[5] = -e1r;                            // × (−i)
      p[8] = c * (e2r + e2i), p[9] = c * (e2i - e2r);     // × c(1 − i)
      p[12] = c * (e3i - e3r), p[13] = -c * (e3r + e3i);  // × c(−1 − i)
    }
  }
  for (int r = 0; r < 4; ++r) radix2(x + 4 * r);
}

inline void dit8_leaf(LaneVec* x) {
  constexpr float c = float(std::numbers::sqrt2 / 2);
  for (int r = 0; r < 4; ++r) radix2(x + 4 * r);
  for (int j = 0; j < 2; ++j) {
    LaneVec* p = x + 2 * j;
    const LaneVec Ar = p[0], Ai = p[1];
    LaneVec Br = p[4], Bi = p[5], Cr = p[8], Ci = p[9], Dr = p[12], Di = p[13];
    if (j == 1) {  // × conj(t): i, c(1 + i), c(−1 + i)
      Br = -p[5], Bi = p[4];
      Cr = c * (p[8] - p[9]), Ci = c * (p[8] + p[9]);
      Dr = -c * (p[12] + p[13]), Di = c * (p[12] - p[13]);
    }
    const LaneVec sr = Ar + Br, si = Ai + Bi, dr = Ar - Br, di = Ai - Bi;
    const LaneVec tr = Cr + Dr, ti = Ci + Di, ur = Cr - Dr, ui = Ci - Di;
    p[0] = sr + tr, p[1] = si + ti, p[8] = sr - tr, p[9] = si - ti;
    p[4] = dr - ui, p[5] = di + ur, p[12] = dr + ui, p[13] = di - ur;
  }
}

// Depth first, so that the blocks of the later passes are still in cache (s elements, twiddles
// of this pass at tw, of the next at tw + 6·s/4).
void dif(LaneVec* x, int s, const float* tw) {
  if (s == 2) return radix2(x);
  if (s == 4) return dif4_leaf(x);
  if (s == 8) return dif8_leaf(x);
  const int q = s / 4;
  dif4(x, x, q, tw);
  for (int r = 0; r < 4; ++r) dif(x + 2 * r * q, q, tw + 6 * q);
}

void dit(LaneVec* x, int s, const float* tw) {
  if (s == 2) return radix2(x);
  if (s == 4) return dit4_leaf(x);
  if (s == 8) return dit8_leaf(x);
  const int q = s / 4;
  for (int r = 0; r < 4; ++r) dit(x + 2 * r * q, q, tw + 6 * q);
  dit4(x, q, tw);
}

// --- W x W transposes of vectors (log2 W shuffle stages) ----------------------------------------

// Stage with distance D: rows i and i + D exchange their D-wide off-diagonal blocks.
template <int D, bool Hi>
constexpr int stage_index(int e) {
  const int c = e / (2 * D) * (2 * D), p = e % (2 * D);
  if (!Hi) return p < D ? c + p : W + c + p - D;
  return p < D ? c + D + p : W + c + p;
}

template <int D, bool Hi, int... E>
inline LaneVec stage_shuffle(LaneVec a, LaneVec b, std::integer_sequence<int, E...>) {
  return __builtin_shufflevector(a, b, stage_index<D, Hi>(E)...);
}

template <int D>
inline void transpose_stage(LaneVec* r) {
  constexpr auto seq = std::make_integer_sequence<int, W>{};
  for (int i = 0; i < W; ++i) {
    if (i & D) continue;
    const LaneVec lo = stage_shuffle<D, false>(r[i], r[i + D], seq);
    const LaneVec hi = stage_shuffle<D, true>(r[i], r[i + D], seq);
    r[i] = lo;
    r[i + D] = hi;
  }
}

// r[i][j] -> r[j][i].
inline void transpose(LaneVec* r) {
  if constexpr (W >= 16) transpose_stage<8>(r);
  if constexpr (W >= 8) transpose_stage<4>(r);
  transpose_stage<2>(r);
  transpose_stage<1>(r);
}

// Interleave (lo/hi halves) and its inverse (even/odd lanes of the pair a, b).
template <bool Hi>
constexpr int zip_index(int e) {
  return (e % 2 ? W : 0) + (Hi ? W / 2 : 0) + e / 2;
}
template <bool Odd>
constexpr int unzip_index(int e) {
  return 2 * e + (Odd ? 1 : 0);
}
template <bool Hi, int... E>
inline LaneVec zip(LaneVec a, LaneVec b, std::integer_sequence<int, E...>) {
  return __builtin_shufflevector(a, b, zip_index<Hi>(E)...);
}
template <bool Odd, int... E>
inline LaneVec unzip(LaneVec a, LaneVec b, std::integer_sequence<int, E...>) {
  return __builtin_shufflevector(a, b, unzip_index<Odd>(E)...);
}

inline LaneVec load(const float* p) {
  LaneVec v;
  std::memcpy(&v, p, sizeof v);
  return v;
}
inline void store(float* p, LaneVec v) { std::memcpy(p, &v, sizeof v); }

}  // namespace

// --- plan -----------------------------------------------------------------------------------------

BatchRealFft::BatchRealFft(int n) : n_(n), m_(n / 2) {
  if (n < 2 || n % 2 != 0) throw Error("fft size must be even and at least 2, got " + std::to_string(n));
  if (!is_power_of_two(n) || n < 16) {
    fallback_ = std::make_unique<RealFft>(n);
    frame_.resize(std::size_t(n));
    bins_.resize(std::size_t(n_bins()));
    return;
  }
  // Twiddles in double, rounded once. Pass over s elements: t_r = e^{−2πi·r·j/s}, j < s/4.
  for (int s = m_; s >= 8; s /= 4)
    for (int j = 0; j < s / 4; ++j)
      for (int r = 1; r <= 3; ++r) {
        const double a = -2.0 * std::numbers::pi * r * j / s;
        tw_.push_back(float(std::cos(a)));
        tw_.push_back(float(std::sin(a)));
      }
  for (int k = 0; k <= m_ / 2; ++k) {
    const double a = -2.0 * std::numbers::pi * k / n;
    split_.push_back(float(std::cos(a)));
    split_.push_back(float(std::sin(a)));
  }
  split_[std::size_t(m_)] = 0.0f;  // k = m/2: exactly −i
  split_[std::size_t(m_) + 1] = -1.0f;
  int bits = 0;
  while ((1 << bits) < m_) ++bits;
  rev_.resize(std::size_t(m_));
  for (int k = 0; k < m_; ++k) {
    unsigned r = 0;
    for (int b = 0; b < bits; ++b) r |= unsigned((k >> b) & 1) << (bits - 1 - b);
    rev_[std::size_t(k)] = r;
  }
  scratch_.resize(std::size_t(n));
}

BatchRealFft::~BatchRealFft() = default;
BatchRealFft::BatchRealFft(BatchRealFft&&) noexcept = default;
BatchRealFft& BatchRealFft::operator=(BatchRealFft&&) noexcept = default;

// --- transforms -------------------------------------------------------------------------------------

void BatchRealFft::forward(const LaneVec* in, LaneVec* out) {
  if (fallback_) return fallback_forward(in, out);
  // z[e] = x[2e] + i·x[2e+1] is the input read as m complex elements. First pass out of place.
  LaneVec* z = scratch_.data();
  dif4(in, z, m_ / 4, tw_.data());
  for (int r = 0; r < 4; ++r) dif(z + 2 * r * (m_ / 4), m_ / 4, tw_.data() + 6 * (m_ / 4));
  // Z = FFT_m(z) in bit-reversed order. With E, O the spectra of the even and odd samples:
  //   E = (Z[k] + conj Z[m−k])/2,  O = (Z[k] − conj Z[m−k])/(2i),
  //   X[k] = E + w^k·O,  X[m−k] = conj(E − w^k·O),  w = e^{−2πi/N}.
  const unsigned* rev = rev_.data();
  out[0] = z[0] + z[1];
  out[1] = LaneVec{};
  out[2 * m_] = z[0] - z[1];
  out[2 * m_ + 1] = LaneVec{};
  for (int k = 1; k <= m_ / 2; ++k) {
    const LaneVec* a = z + 2 * rev[k];
    const LaneVec* b = z + 2 * rev[m_ - k];
    const LaneVec er = 0.5f * (a[0] + b[0]), ei = 0.5f * (a[1] - b[1]);
    const LaneVec orr = 0.5f * (a[1] + b[1]), oi = 0.5f * (b[0] - a[0]);
    const float wr = split_[2 * std::size_t(k)], wi = split_[2 * std::size_t(k) + 1];
    const LaneVec pr = orr * wr - oi * wi, pi = orr * wi + oi * wr;
    out[2 * k] = er + pr;
    out[2 * k + 1] = ei + pi;
    out[2 * (m_ - k)] = er - pr;
    out[2 * (m_ - k) + 1] = pi - ei;
  }
}

void BatchRealFft::inverse(const LaneVec* in, LaneVec* out) {
  if (fallback_) return fallback_inverse(in, out);
  // Z'[k] = (X[k] + conj X[m−k]) + i·conj(w^k)·(X[k] − conj X[m−k]) is the spectrum of
  // z[e] = y[2e] + i·y[2e+1] with y = N·irfft(X); written bit-reversed, then the inverse
  // complex FFT runs in place and leaves z in natural order, which is y's layout.
  const unsigned* rev = rev_.data();
  out[0] = in[0] + in[2 * m_];
  out[1] = in[0] - in[2 * m_];
  for (int k = 1; k <= m_ / 2; ++k) {
    const LaneVec* a = in + 2 * k;
    const LaneVec* b = in + 2 * (m_ - k);  // conj X[m−k] = (b[0], −b[1])
    const LaneVec sr = a[0] + b[0], si = a[1] - b[1];
    const LaneVec er = a[0] - b[0], ei = a[1] + b[1];
    const float wr = split_[2 * std::size_t(k)], wi = split_[2 * std::size_t(k) + 1];
    const LaneVec dr = er * wr + ei * wi, di = ei * wr - er * wi;  // (X[k] − conj X[m−k])·conj(w^k)
    LaneVec* zk = out + 2 * rev[k];
    LaneVec* zm = out + 2 * rev[m_ - k];
    zk[0] = sr - di;  // S + i·D
    zk[1] = si + dr;
    zm[0] = sr + di;  // conj(S) + i·conj(D)
    zm[1] = dr - si;
  }
  for (int r = 0; r < 4; ++r) dit(out + 2 * r * (m_ / 4), m_ / 4, tw_.data() + 6 * (m_ / 4));
  dit4(out, m_ / 4, tw_.data());
}

void BatchRealFft::fallback_forward(const LaneVec* in, LaneVec* out) {
  for (int j = 0; j < W; ++j) {
    for (int i = 0; i < n_; ++i) frame_[std::size_t(i)] = in[i][j];
    fallback_->forward(frame_.data(), bins_.data());
    for (int k = 0; k < n_bins(); ++k) {
      out[2 * k][j] = bins_[std::size_t(k)].real();
      out[2 * k + 1][j] = bins_[std::size_t(k)].imag();
    }
  }
}

void BatchRealFft::fallback_inverse(const LaneVec* in, LaneVec* out) {
  for (int j = 0; j < W; ++j) {
    for (int k = 0; k < n_bins(); ++k) bins_[std::size_t(k)] = {in[2 * k][j], in[2 * k + 1][j]};
    fallback_->inverse(bins_.data(), frame_.data());
    for (int i = 0; i < n_; ++i) out[i][j] = frame_[std::size_t(i)];
  }
}

// --- frames and bins in and out of the batch layout ----------------------------------------------

void gather_frames(const float* src, std::size_t hop, int count, const float* window, int first,
                   int last, int n, LaneVec* out) {
  assert(count >= 1 && count <= W && 0 <= first && first <= last && last <= n);
  std::fill(out, out + first, LaneVec{});
  std::fill(out + last, out + n, LaneVec{});
  int i = first;
  if (count == W) {
    LaneVec r[W];
    for (; i + W <= last; i += W) {
      for (int j = 0; j < W; ++j) r[j] = load(src + std::size_t(j) * hop + std::size_t(i));
      transpose(r);
      for (int k = 0; k < W; ++k) out[i + k] = r[k] * window[i + k];
    }
  }
  for (; i < last; ++i) {
    LaneVec v{};
    for (int j = 0; j < count; ++j) v[j] = src[std::size_t(j) * hop + std::size_t(i)];
    out[i] = v * window[i];
  }
}

void overlap_add_frames(const LaneVec* in, const float* window, int first, int last, std::size_t hop,
                        int count, float* dst) {
  assert(count >= 1 && count <= W && 0 <= first && first <= last);
  int i = first;
  if (count == W) {
    LaneVec r[W];
    for (; i + W <= last; i += W) {
      for (int k = 0; k < W; ++k) r[k] = in[i + k] * window[i + k];
      transpose(r);
      // Frames overlap when hop < W: each load-add-store sees the previous frame's store.
      for (int j = 0; j < W; ++j) {
        float* d = dst + std::size_t(j) * hop + std::size_t(i);
        store(d, load(d) + r[j]);
      }
    }
  }
  for (; i < last; ++i) {
    const LaneVec v = in[i] * window[i];
    for (int j = 0; j < count; ++j) dst[std::size_t(j) * hop + std::size_t(i)] += v[j];
  }
}

void bins_to_columns(const LaneVec* in, int n_bins, int count, std::complex<float>* cols,
                     std::size_t stride) {
  assert(count >= 1 && count <= W);
  float* c = reinterpret_cast<float*>(cols);  // [complex.numbers]: re, im
  int k = 0;
  if (count == W) {
    constexpr auto seq = std::make_integer_sequence<int, W>{};
    LaneVec re[W], im[W];
    for (; k + W <= n_bins; k += W) {
      for (int b = 0; b < W; ++b) {
        re[b] = in[2 * (k + b)];
        im[b] = in[2 * (k + b) + 1];
      }
      transpose(re);
      transpose(im);
      for (int j = 0; j < W; ++j) {
        float* d = c + 2 * (std::size_t(j) * stride + std::size_t(k));
        store(d, zip<false>(re[j], im[j], seq));
        store(d + W, zip<true>(re[j], im[j], seq));
      }
    }
  }
  for (; k < n_bins; ++k)
    for (int j = 0; j < count; ++j) {
      float* d = c + 2 * (std::size_t(j) * stride + std::size_t(k));
      d[0] = in[2 * k][j];
      d[1] = in[2 * k + 1][j];
    }
}

void columns_to_bins(const std::complex<float>* cols, std::size_t stride, int n_bins, int count,
                     LaneVec* out) {
  assert(count >= 1 && count <= W);
  const float* c = reinterpret_cast<const float*>(cols);
  int k = 0;
  if (count == W) {
    constexpr auto seq = std::make_integer_sequence<int, W>{};
    LaneVec re[W], im[W];
    for (; k + W <= n_bins; k += W) {
      for (int j = 0; j < W; ++j) {
        const float* s = c + 2 * (std::size_t(j) * stride + std::size_t(k));
        const LaneVec a = load(s), b = load(s + W);
        re[j] = unzip<false>(a, b, seq);
        im[j] = unzip<true>(a, b, seq);
      }
      transpose(re);
      transpose(im);
      for (int b = 0; b < W; ++b) {
        out[2 * (k + b)] = re[b];
        out[2 * (k + b) + 1] = im[b];
      }
    }
  }
  for (; k < n_bins; ++k) {
    LaneVec re{}, im{};
    for (int j = 0; j < count; ++j) {
      const float* s = c + 2 * (std::size_t(j) * stride + std::size_t(k));
      re[j] = s[0];
      im[j] = s[1];
    }
    out[2 * k] = re;
    out[2 * k + 1] = im;
  }
}

}  // namespace tessera::audio
