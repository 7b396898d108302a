// stft.h — short-time Fourier transform and its inverse (weighted overlap-add).
// F bins (n_fft/2 + 1), T frames, N = n_fft, L signal length in samples.
//
// Contract (same conventions as torch.stft / librosa.stft with center=True, pad_mode='reflect'):
//  - window: periodic Hann of win_length, w[n] = 0.5 − 0.5·cos(2πn/win_length), zero-padded
//    centred into N (offset (N − win_length)/2, rounded down).
//  - centring: the signal is reflect-padded by N/2 on both sides (x[-k] = x[k], no edge
//    repeat); frame t covers padded samples [t·hop, t·hop + N), i.e. it is centred on x[t·hop].
//  - forward: x of length L ≥ 1 gives a complex F x T matrix, one column per frame,
//    T = 1 + floor(L / hop). No scaling: X[k] = Σ_n w[n]·x[n]·e^{−2πikn/N}.
//  - magnitude: |X| (power 1).
//  - inverse: the 1/N sits here (as numpy.fft.irfft). Each column is inverse-transformed,
//    multiplied by the window, overlap-added, and divided by the overlap-added squared window
//    (least-squares ISTFT, Griffin & Lim 1984). Samples whose envelope is below 1e-10 are 0.
//    Under COLA (Allen 1977; Hann with hop ≤ win/2 at an integer divisor) ISTFT(STFT(x)) = x.
//  - forward and inverse transform several frames at once (BatchRealFft, batch_fft.h: vectorised
//    for power-of-two n_fft, KissFFT per frame otherwise); analyze_frame / synthesize_frame use
//    KissFFT (RealFft). Results agree to float rounding.
//  - objects keep FFT plans and scratch; they are move-only and not thread-safe (one per thread).
#pragma once
#include <Eigen/Core>
#include <complex>
#include <cstddef>
#include <memory>
#include <vector>

#include "audio/audio_config.h"
#include "audio/batch_fft.h"

struct kiss_fftr_state;  // KissFFT plan (kiss_fftr.h), kept out of this header

namespace tessera::audio {

// RealFft — one planned real FFT of even size n (forward and inverse plans), RAII, move-only.
//   RealFft fft(1024); fft.forward(x, X);   // n reals -> n/2+1 bins, unscaled
//   fft.inverse(X, x);                       // n/2+1 bins -> n reals, unscaled (n·irfft)
// The inverse ignores the imaginary parts of the DC and Nyquist bins.
class RealFft {
 public:
  explicit RealFft(int n);
  int size() const { return n_; }
  void forward(const float* in, std::complex<float>* out) const;
  void inverse(const std::complex<float>* in, float* out) const;

 private:
  struct PlanFree {
    void operator()(kiss_fftr_state* p) const;
  };
  int n_;
  std::unique_ptr<kiss_fftr_state, PlanFree> fwd_, inv_;
};

// How the inverse treats the N/2 padded samples at each end.
enum class IstftEdges {
  trim,  // drop them (torch.istft / librosa.istft)
  fold,  // add them back onto the samples they reflect (the exact least-squares inverse of
         // this reflect-padded STFT; Griffin-Lim uses it so each iteration is a projection)
};

class Stft {
 public:
  // Throws tessera::Error on n_fft not even and ≥ 2, win_length outside [1, n_fft], hop < 1.
  Stft(int n_fft, int win_length, int hop_length);
  explicit Stft(const AudioConfig& cfg) : Stft(cfg.n_fft, cfg.win_length, cfg.hop_length) {}

  int n_fft() const { return n_fft_; }
  int win_length() const { return win_length_; }
  int hop_length() const { return hop_; }
  int n_bins() const { return n_fft_ / 2 + 1; }
  int pad() const { return n_fft_ / 2; }
  std::size_t n_frames(std::size_t length) const { return 1 + length / std::size_t(hop_); }
  const std::vector<float>& window() const { return window_; }  // N, zero-padded centred
  int window_offset() const { return win_offset_; }             // first non-zero-padded tap

  // x (L) -> X (F x T). Throws tessera::Error on an empty signal.
  Eigen::MatrixXcf forward(const std::vector<float>& x);
  void forward(const float* x, std::size_t length, Eigen::MatrixXcf& out);  // resizes out

  // X (F x T) -> x (length). length 0 means hop·(T − 1).
  std::vector<float> inverse(const Eigen::MatrixXcf& spec, std::size_t length,
                             IstftEdges edges = IstftEdges::trim);
  void inverse(const Eigen::MatrixXcf& spec, std::size_t length, std::vector<float>& out,
               IstftEdges edges = IstftEdges::trim);

  // Frame-level steps (allocation-free), used by log-mel and Griffin-Lim:
  // padded frame (N samples) -> window -> FFT -> F bins.
  void analyze_frame(const float* frame, std::complex<float>* bins);
  // F bins -> inverse FFT (with 1/N) -> window -> N samples written to frame.
  void synthesize_frame(const std::complex<float>* bins, float* frame);
  // x (L) -> reflect-padded copy (L + N) in padded (resized).
  void reflect_pad(const float* x, std::size_t length, std::vector<float>& padded) const;
  // Index of x that padded sample i (0 ≤ i, any size) holds under reflect padding of length L.
  std::size_t reflect_index(std::ptrdiff_t i, std::size_t length) const;

  // Overlap-add of T synthesized frames into ola (size N + hop·(T − 1), zeroed here).
  void overlap_add(const Eigen::MatrixXcf& spec, std::vector<float>& ola);
  // Turns an overlap-added buffer into the signal (length): divides by the squared-window
  // envelope for T frames, with the given edge treatment. Envelopes are cached per (T, L).
  void normalize_ola(const std::vector<float>& ola, std::size_t n_frames, std::size_t length,
                     IstftEdges edges, float* out);

 private:
  void update_envelope(std::size_t n_frames, std::size_t length, IstftEdges edges);

  int n_fft_, win_length_, hop_, win_offset_;
  RealFft fft_;
  BatchRealFft batch_;
  LaneBuffer batch_frames_;                     // N vectors: W frames in the batch layout
  LaneBuffer batch_bins_;                       // 2F vectors
  std::vector<float> window_;                   // N
  std::vector<float> synth_window_;             // N, window / N (the inverse's 1/N)
  std::vector<float> frame_;                    // N analysis scratch (zeros outside window)
  std::vector<float> padded_;                   // L + N scratch for forward
  std::vector<float> ola_;                      // scratch for inverse
  std::vector<float> inv_env_;                  // length: 1 / envelope (0 where too small)
  std::size_t env_frames_ = 0, env_length_ = 0;
  IstftEdges env_edges_ = IstftEdges::trim;
  bool env_valid_ = false;
};

// |X| elementwise (power 1): F x T complex -> F x T real.
Eigen::MatrixXf magnitude(const Eigen::MatrixXcf& spec);
void magnitude(const std::complex<float>* bins, std::size_t n, float* out);

}  // namespace tessera::audio
