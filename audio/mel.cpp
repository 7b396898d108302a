// mel.cpp — mel scales and the sparse triangular filterbank with its pseudo-inverse.
// M mels, F bins.
#include "audio/mel.h"

#include <Eigen/Dense>
#include <algorithm>
#include <cmath>
#include <stdexcept>
#include <string>

#include "audio/error.h"

namespace tessera::audio {

namespace {
// Slaney 1998: 200/3 Hz per mel below 1 kHz, then 27 mels per factor 6.4.
constexpr double kSlaneyHzPerMel = 200.0 / 3.0;
constexpr double kSlaneyBreakHz = 1000.0;
constexpr double kSlaneyBreakMel = kSlaneyBreakHz / kSlaneyHzPerMel;  // 15
const double kSlaneyLogStep = std::log(6.4) / 27.0;

std::string num(double v) {
  std::string s = std::to_string(v);
  s.erase(s.find_last_not_of('0') + 1);
  if (!s.empty() && s.back() == '.') s.pop_back();
  return s;
}
}  // namespace

double hz_to_mel(double hz, MelScale scale) {
  if (scale == MelScale::htk) return 2595.0 * std::log10(1.0 + hz / 700.0);
  if (hz < kSlaneyBreakHz) return hz / kSlaneyHzPerMel;
  return kSlaneyBreakMel + std::log(hz / kSlaneyBreakHz) / kSlaneyLogStep;
}

double mel_to_hz(double mel, MelScale scale) {
  if (scale == MelScale::htk) return 700.0 * (std::pow(10.0, mel / 2595.0) - 1.0);
  if (mel < kSlaneyBreakMel) return mel * kSlaneyHzPerMel;
  return kSlaneyBreakHz * std::exp(kSlaneyLogStep * (mel - kSlaneyBreakMel));
}

MelFilterbank::MelFilterbank(int sample_rate, int n_fft, int n_mels, double f_min, double f_max,
                             MelScale scale, bool norm_area, Inverse inverse)
    : n_mels_(n_mels), n_bins_(n_fft / 2 + 1) {
  if (sample_rate <= 0) throw Error("sample_rate must be positive, got " + std::to_string(sample_rate));
  if (n_fft < 2 || n_fft % 2 != 0)
    throw Error("n_fft must be even and at least 2, got " + std::to_string(n_fft));
  if (n_mels < 1) throw Error("n_mels must be positive, got " + std::to_string(n_mels));
  if (!(f_min >= 0.0) || !(f_max > f_min) || f_max > 0.5 * sample_rate)
    throw Error("mel band edges must satisfy 0 <= f_min < f_max <= sample_rate/2 = " +
                num(0.5 * sample_rate) + ", got f_min " + num(f_min) + ", f_max " + num(f_max));

  // n_mels + 2 edges equally spaced in mel (numpy.linspace: last point exactly f_max).
  const int n_edges = n_mels + 2;
  const double mel_lo = hz_to_mel(f_min, scale), mel_hi = hz_to_mel(f_max, scale);
  std::vector<double> edge(static_cast<std::size_t>(n_edges));
  for (int i = 0; i < n_edges; ++i) {
    const double m = i == n_edges - 1 ? mel_hi : mel_lo + i * (mel_hi - mel_lo) / (n_edges - 1);
    edge[std::size_t(i)] = mel_to_hz(m, scale);
  }

  Eigen::MatrixXd W = Eigen::MatrixXd::Zero(n_mels, n_bins_);
  for (int m = 0; m < n_mels; ++m) {
    const double lo = edge[std::size_t(m)], mid = edge[std::size_t(m) + 1], hi = edge[std::size_t(m) + 2];
    const double enorm = norm_area ? 2.0 / (hi - lo) : 1.0;
    for (int k = 0; k < n_bins_; ++k) {
      const double f = double(k) * sample_rate / n_fft;
      const double rise = (f - lo) / (mid - lo), fall = (hi - f) / (hi - mid);
      W(m, k) = std::max(0.0, std::min(rise, fall)) * enorm;
    }
  }

  // Sparse copy: each triangle is one contiguous run of bins.
  first_.assign(std::size_t(n_mels), 0);
  offset_.assign(std::size_t(n_mels) + 1, 0);
  for (int m = 0; m < n_mels; ++m) {
    int a = 0, b = -1;
    for (int k = 0; k < n_bins_; ++k)
      if (W(m, k) > 0.0) {
        if (b < a) a = k;
        b = k;
      }
    first_[std::size_t(m)] = b >= a ? a : 0;
    for (int k = a; k <= b; ++k) weights_.push_back(float(W(m, k)));
    offset_[std::size_t(m) + 1] = weights_.size();
  }

  // Pseudo-inverse in double through the M x M Gram matrix: with M·Mᵀ = V·Λ·Vᵀ,
  // G = (M·Mᵀ)⁺ = V·Λ⁺·Vᵀ and M⁺ = Mᵀ·G (A⁺ = Aᵀ(AAᵀ)⁺, Penrose 1955). Eigenvalues below
  // λ_max·1e-12 (singular values below σ_max·1e-6) count as zero, so empty bands are handled.
  // L = λ_max(M·Mᵀ) = λ_max(MᵀM) is the NNLS step bound.
  dense_ = W.cast<float>();
  if (inverse == Inverse::without) return;
  const Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> eig(W * W.transpose());
  const Eigen::VectorXd& lambda = eig.eigenvalues();
  lipschitz_ = lambda.maxCoeff();
  Eigen::VectorXd inv = Eigen::VectorXd::Zero(n_mels);
  for (int i = 0; i < n_mels; ++i)
    if (lambda(i) > lipschitz_ * 1e-12) inv(i) = 1.0 / lambda(i);
  const Eigen::MatrixXd G = eig.eigenvectors() * inv.asDiagonal() * eig.eigenvectors().transpose();
  pinv_ = (W.transpose() * G).cast<float>();
  gram_pinv_ = G.cast<float>();
  has_inverse_ = true;
}

void MelFilterbank::require_inverse() const {
  if (!has_inverse_) throw std::logic_error("mel filterbank was built without its pseudo-inverse");
}

const Eigen::MatrixXf& MelFilterbank::pinv() const {
  require_inverse();
  return pinv_;
}

const Eigen::MatrixXf& MelFilterbank::gram_pinv() const {
  require_inverse();
  return gram_pinv_;
}

double MelFilterbank::lipschitz() const {
  require_inverse();
  return lipschitz_;
}

void MelFilterbank::apply(const float* mag, float* mel) const {
  for (int m = 0; m < n_mels_; ++m) {
    const float* w = weights(m);
    const float* x = mag + first_[std::size_t(m)];
    const int n = band_size(m);
    float acc = 0.0f;
    for (int i = 0; i < n; ++i) acc += w[i] * x[i];
    mel[m] = acc;
  }
}

void MelFilterbank::apply_transpose(const float* v, float* out) const {
  std::fill(out, out + n_bins_, 0.0f);
  for (int m = 0; m < n_mels_; ++m) {
    const float* w = weights(m);
    float* y = out + first_[std::size_t(m)];
    const int n = band_size(m);
    const float vm = v[m];
    for (int i = 0; i < n; ++i) y[i] += w[i] * vm;
  }
}

void MelFilterbank::apply_pinv(const float* v, float* out, float* scratch) const {
  require_inverse();
  Eigen::Map<Eigen::VectorXf> g(scratch, n_mels_);
  g.noalias() = gram_pinv_ * Eigen::Map<const Eigen::VectorXf>(v, n_mels_);
  apply_transpose(scratch, out);
}

void MelFilterbank::apply(const Eigen::MatrixXf& mag, Eigen::MatrixXf& mel) const {
  if (mag.rows() != n_bins_)
    throw Error("mel filterbank expects " + std::to_string(n_bins_) + " bins, got " + std::to_string(mag.rows()));
  mel.resize(n_mels_, mag.cols());
  for (Eigen::Index t = 0; t < mag.cols(); ++t) apply(mag.col(t).data(), mel.col(t).data());
}

}  // namespace tessera::audio
