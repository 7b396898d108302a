// mel.h — mel scales (Slaney 1998, HTK) and the triangular mel filterbank M (M x F).
// M mels, F bins (n_fft/2 + 1), T frames.
//
// Filters (the formula of librosa.filters.mel): n_mels + 2 edge frequencies equally spaced on
// the mel scale between f_min and f_max; band m rises linearly from edge m to m+1 and falls to
// m+2, evaluated at the FFT bin frequencies k·sample_rate/n_fft. With area normalisation each
// band is scaled by 2 / (f_{m+2} − f_m) (Slaney's Auditory Toolbox; librosa norm='slaney').
#pragma once
#include <Eigen/Core>
#include <cstddef>
#include <vector>

#include "audio/audio_config.h"

namespace tessera::audio {

// Slaney (Auditory Toolbox, Tech. Rep. 1998-010): linear below 1000 Hz at 200/3 Hz per mel
// (1000 Hz = 15 mel), logarithmic above with a step of ln(6.4)/27 per mel.
// HTK (O'Shaughnessy 1987; the HTK Book): mel = 2595·log10(1 + f/700).
double hz_to_mel(double hz, MelScale scale);
double mel_to_hz(double mel, MelScale scale);

class MelFilterbank {
 public:
  // What to precompute beyond the filters: the pseudo-inverse (an M x M eigendecomposition,
  // a few ms) is needed by the inversion only, so feature extraction leaves it out.
  enum class Inverse { with, without };

  // Throws tessera::Error on a bad sample rate, n_fft, n_mels or f_min/f_max.
  MelFilterbank(int sample_rate, int n_fft, int n_mels, double f_min, double f_max,
                MelScale scale, bool norm_area, Inverse inverse = Inverse::with);
  explicit MelFilterbank(const AudioConfig& cfg, Inverse inverse = Inverse::with)
      : MelFilterbank(cfg.sample_rate, cfg.n_fft, cfg.n_mels, cfg.f_min, cfg.f_max,
                      cfg.mel_scale, cfg.mel_norm_area, inverse) {}

  int n_mels() const { return n_mels_; }
  int n_bins() const { return n_bins_; }

  // mel (M) = M · mag (F); sparse, allocation-free.
  void apply(const float* mag, float* mel) const;
  // out (F) = Mᵀ · v (M); sparse, allocation-free.
  void apply_transpose(const float* v, float* out) const;
  // out (F) = M⁺ · v (M), computed as Mᵀ·(G·v) with G = (M·Mᵀ)⁺ (M x M), which equals M⁺·v
  // (Penrose 1955: A⁺ = Aᵀ(AAᵀ)⁺). scratch holds M floats.
  void apply_pinv(const float* v, float* out, float* scratch) const;
  // F x T -> M x T (out resized).
  void apply(const Eigen::MatrixXf& mag, Eigen::MatrixXf& mel) const;

  // Band m is non-zero on bins [first_bin(m), first_bin(m) + weights(m).size()).
  int first_bin(int m) const { return first_[std::size_t(m)]; }
  const float* weights(int m) const { return weights_.data() + offset_[std::size_t(m)]; }
  int band_size(int m) const { return int(offset_[std::size_t(m) + 1] - offset_[std::size_t(m)]); }

  const Eigen::MatrixXf& dense() const { return dense_; }  // M x F
  // Built with Inverse::with only (std::logic_error otherwise), as is apply_pinv.
  const Eigen::MatrixXf& pinv() const;       // F x M, Moore–Penrose M⁺ = Mᵀ·G
  const Eigen::MatrixXf& gram_pinv() const;  // M x M, G = (M·Mᵀ)⁺
  double lipschitz() const;                  // largest eigenvalue of MᵀM
  bool has_inverse() const { return has_inverse_; }

 private:
  int n_mels_, n_bins_;
  std::vector<int> first_;             // M
  std::vector<std::size_t> offset_;    // M + 1, into weights_
  std::vector<float> weights_;         // non-zero weights, band after band
  Eigen::MatrixXf dense_, pinv_, gram_pinv_;
  double lipschitz_ = 0.0;
  bool has_inverse_ = false;
  void require_inverse() const;
};

}  // namespace tessera::audio
