// batch_fft.h — real FFT of several frames at once, vectorised across frames (one frame per SIMD lane).
// W lanes (frames per batch), N = n (FFT size), F bins (N/2 + 1).
//
// Layout ("structure of arrays"): a batch is an array of LaneVec, lane j of every vector
// belongs to frame j.
//  - time domain: N vectors, vector i holds sample i of the W frames;
//  - frequency domain: 2F vectors, vector 2k holds Re X[k] and vector 2k + 1 holds Im X[k].
// Conventions are those of RealFft (KissFFT, numpy.fft.rfft): forward X[k] = Σ_n x[n]·e^{−2πikn/N},
// unscaled; inverse unscaled (N·irfft), the imaginary parts of the DC and Nyquist bins ignored.
//
// Power-of-two sizes N ≥ 16 use the planned transform here: the N/2-point complex FFT of
// z[n] = x[2n] + i·x[2n+1] (radix-4 decimation in frequency forward, in time inverse, bit-reversed
// order in between, so no permutation pass), then the split into the real spectrum
// (Cooley & Tukey 1965; the real-from-half-size split as in Press et al., Numerical Recipes,
// "FFT of real functions" — section from memory).
// Other even sizes (and 2..8) fall back to one KissFFT (RealFft) per lane. Plans are made once; calls
// allocate nothing. Objects keep scratch: not thread-safe (one per thread).
#pragma once
#include <cmath>
#include <complex>
#include <cstddef>
#include <memory>
#include <vector>

#if defined(__SSE2__)
#include <immintrin.h>
#endif

namespace tessera::audio {

// Frames per batch: the float lanes of the widest vector unit this code is compiled for.
#if defined(__AVX512F__)
inline constexpr int kFftLanes = 16;
#elif defined(__AVX__)
inline constexpr int kFftLanes = 8;
#else
inline constexpr int kFftLanes = 4;  // SSE2 (every x86-64) and other targets
#endif

// W floats, one per frame (GCC/Clang vector extension; lowered to plain code where no SIMD exists).
using LaneVec = float __attribute__((vector_size(4 * kFftLanes)));
using LaneBuffer = std::vector<LaneVec>;  // aligned by std::allocator (C++17 over-aligned new)

class RealFft;

// BatchRealFft — a planned real FFT of even size n over W frames at once, move-only.
//   BatchRealFft fft(1024);  LaneBuffer x(1024), X(2 * 513);
//   fft.forward(x.data(), X.data());  fft.inverse(X.data(), x.data());  // x is now 1024·x
class BatchRealFft {
 public:
  static constexpr int lanes = kFftLanes;
  explicit BatchRealFft(int n);  // throws tessera::Error unless n is even and ≥ 2
  ~BatchRealFft();
  BatchRealFft(BatchRealFft&&) noexcept;
  BatchRealFft& operator=(BatchRealFft&&) noexcept;

  int size() const { return n_; }
  int n_bins() const { return n_ / 2 + 1; }
  bool vectorised() const { return fallback_ == nullptr; }  // false: KissFFT per lane

  // in: N vectors -> out: 2F vectors. in and out must not overlap.
  void forward(const LaneVec* in, LaneVec* out);
  // in: 2F vectors (not modified) -> out: N vectors. in and out must not overlap.
  void inverse(const LaneVec* in, LaneVec* out);

 private:
  void fallback_forward(const LaneVec* in, LaneVec* out);
  void fallback_inverse(const LaneVec* in, LaneVec* out);

  int n_, m_;                      // m = N/2 complex points
  std::vector<float> tw_;          // radix-4 twiddles t1, t2, t3 (re, im) per pass, largest pass first
  std::vector<float> split_;       // e^{−2πik/N}, k in [0, m/2], (re, im)
  std::vector<unsigned> rev_;      // bit reversal over log2(m) bits
  LaneBuffer scratch_;             // N vectors
  std::unique_ptr<RealFft> fallback_;
  std::vector<float> frame_;               // N, fallback scratch
  std::vector<std::complex<float>> bins_;  // F, fallback scratch
};

// Moving frames between a signal and the batch layout. Rows i outside [first, last) are the
// window's zero padding. count ≤ W frames; lanes past count are zero on output.

// out[i][j] = src[j·hop + i]·window[i] for i in [first, last), 0 elsewhere (N vectors written).
void gather_frames(const float* src, std::size_t hop, int count, const float* window, int first,
                   int last, int n, LaneVec* out);
// dst[j·hop + i] += in[i][j]·window[i] for i in [first, last), j < count.
void overlap_add_frames(const LaneVec* in, const float* window, int first, int last, std::size_t hop,
                        int count, float* dst);
// Bins between the batch layout and complex columns (column j starts at cols + j·stride).
void bins_to_columns(const LaneVec* in, int n_bins, int count, std::complex<float>* cols,
                     std::size_t stride);
void columns_to_bins(const std::complex<float>* cols, std::size_t stride, int n_bins, int count,
                     LaneVec* out);

// IEEE square root of each lane.
inline LaneVec lane_sqrt(LaneVec v) {
#if defined(__AVX512F__)
  return _mm512_mask_sqrt_ps(v, __mmask16(0xffff), v);  // = _mm512_sqrt_ps without GCC 12's spurious warning
#elif defined(__AVX__)
  return _mm256_sqrt_ps(v);
#elif defined(__SSE2__)
  return _mm_sqrt_ps(v);
#else
  for (int j = 0; j < kFftLanes; ++j) v[j] = std::sqrt(v[j]);
  return v;
#endif
}

}  // namespace tessera::audio
