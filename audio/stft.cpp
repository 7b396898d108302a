// stft.cpp — STFT/ISTFT with a periodic Hann window, centred reflect padding, batched real FFTs.
// F bins, T frames, N = n_fft, L signal length.
#include "audio/stft.h"

#include <kiss_fftr.h>

#include <algorithm>
#include <cassert>
#include <cmath>
#include <cstring>
#include <numbers>
#include <string>

#include "audio/error.h"

namespace tessera::audio {

// std::complex<float> is layout-compatible with float[2] ([complex.numbers]), as is kiss_fft_cpx.
static_assert(sizeof(kiss_fft_cpx) == sizeof(std::complex<float>));

void RealFft::PlanFree::operator()(kiss_fftr_state* p) const { kiss_fftr_free(p); }

RealFft::RealFft(int n) : n_(n) {
  if (n < 2 || n % 2 != 0)
    throw Error("fft size must be even and at least 2, got " + std::to_string(n));
  fwd_.reset(kiss_fftr_alloc(n, 0, nullptr, nullptr));
  inv_.reset(kiss_fftr_alloc(n, 1, nullptr, nullptr));
  if (!fwd_ || !inv_) throw Error("cannot plan an fft of size " + std::to_string(n));
}

void RealFft::forward(const float* in, std::complex<float>* out) const {
  kiss_fftr(fwd_.get(), in, reinterpret_cast<kiss_fft_cpx*>(out));
}

void RealFft::inverse(const std::complex<float>* in, float* out) const {
  kiss_fftri(inv_.get(), reinterpret_cast<const kiss_fft_cpx*>(in), out);
}

static int checked_n_fft(int n_fft, int win_length, int hop_length) {
  if (n_fft < 2 || n_fft % 2 != 0)
    throw Error("n_fft must be even and at least 2, got " + std::to_string(n_fft));
  if (win_length < 1 || win_length > n_fft)
    throw Error("win_length must be in [1, n_fft=" + std::to_string(n_fft) + "], got " +
                std::to_string(win_length));
  if (hop_length < 1)
    throw Error("hop_length must be positive, got " + std::to_string(hop_length));
  return n_fft;
}

Stft::Stft(int n_fft, int win_length, int hop_length)
    : n_fft_(checked_n_fft(n_fft, win_length, hop_length)),
      win_length_(win_length),
      hop_(hop_length),
      win_offset_((n_fft - win_length) / 2),
      fft_(n_fft),
      batch_(n_fft),
      batch_frames_(std::size_t(n_fft)),
      batch_bins_(2 * std::size_t(n_bins())),
      window_(std::size_t(n_fft), 0.0f),
      synth_window_(std::size_t(n_fft), 0.0f),
      frame_(std::size_t(n_fft), 0.0f) {
  // Periodic Hann (scipy.signal.get_window('hann', n, fftbins=True)), computed in double.
  for (int n = 0; n < win_length; ++n) {
    const double w = 0.5 - 0.5 * std::cos(2.0 * std::numbers::pi * n / win_length);
    window_[std::size_t(win_offset_ + n)] = float(w);
    synth_window_[std::size_t(win_offset_ + n)] = float(w / n_fft);
  }
}

std::size_t Stft::reflect_index(std::ptrdiff_t i, std::size_t length) const {
  assert(length >= 1);
  if (length == 1) return 0;
  const std::ptrdiff_t period = 2 * std::ptrdiff_t(length - 1);
  std::ptrdiff_t j = (i - pad()) % period;
  if (j < 0) j += period;
  if (j >= std::ptrdiff_t(length)) j = period - j;
  return std::size_t(j);
}

void Stft::reflect_pad(const float* x, std::size_t length, std::vector<float>& padded) const {
  const std::size_t p = std::size_t(pad());
  padded.resize(length + 2 * p);
  for (std::size_t i = 0; i < p; ++i) padded[i] = x[reflect_index(std::ptrdiff_t(i), length)];
  std::copy(x, x + length, padded.begin() + std::ptrdiff_t(p));
  for (std::size_t i = p + length; i < padded.size(); ++i)
    padded[i] = x[reflect_index(std::ptrdiff_t(i), length)];
}

void Stft::analyze_frame(const float* frame, std::complex<float>* bins) {
  const int end = win_offset_ + win_length_;
  for (int n = win_offset_; n < end; ++n) frame_[std::size_t(n)] = frame[n] * window_[std::size_t(n)];
  fft_.forward(frame_.data(), bins);
}

void Stft::synthesize_frame(const std::complex<float>* bins, float* frame) {
  fft_.inverse(bins, frame);
  for (int n = 0; n < n_fft_; ++n) frame[n] *= synth_window_[std::size_t(n)];
}

Eigen::MatrixXcf Stft::forward(const std::vector<float>& x) {
  Eigen::MatrixXcf out;
  forward(x.data(), x.size(), out);
  return out;
}

void Stft::forward(const float* x, std::size_t length, Eigen::MatrixXcf& out) {
  if (length == 0) throw Error("cannot take the stft of an empty signal");
  const std::size_t T = n_frames(length);
  reflect_pad(x, length, padded_);
  out.resize(n_bins(), Eigen::Index(T));
  for (std::size_t t0 = 0; t0 < T; t0 += kFftLanes) {
    const int count = int(std::min<std::size_t>(kFftLanes, T - t0));
    gather_frames(padded_.data() + t0 * std::size_t(hop_), std::size_t(hop_), count, window_.data(), win_offset_,
                  win_offset_ + win_length_, n_fft_, batch_frames_.data());
    batch_.forward(batch_frames_.data(), batch_bins_.data());
    bins_to_columns(batch_bins_.data(), n_bins(), count, out.col(Eigen::Index(t0)).data(), std::size_t(n_bins()));
  }
}

void Stft::overlap_add(const Eigen::MatrixXcf& spec, std::vector<float>& ola) {
  assert(spec.rows() == n_bins());
  const std::size_t T = std::size_t(spec.cols());
  ola.assign(std::size_t(n_fft_) + std::size_t(hop_) * (T - 1), 0.0f);
  for (std::size_t t0 = 0; t0 < T; t0 += kFftLanes) {
    const int count = int(std::min<std::size_t>(kFftLanes, T - t0));
    columns_to_bins(spec.col(Eigen::Index(t0)).data(), std::size_t(n_bins()), n_bins(), count, batch_bins_.data());
    batch_.inverse(batch_bins_.data(), batch_frames_.data());
    overlap_add_frames(batch_frames_.data(), synth_window_.data(), win_offset_, win_offset_ + win_length_,
                       std::size_t(hop_), count, ola.data() + t0 * std::size_t(hop_));
  }
}

void Stft::update_envelope(std::size_t T, std::size_t length, IstftEdges edges) {
  if (env_valid_ && env_frames_ == T && env_length_ == length && env_edges_ == edges) return;
  const std::size_t n_ola = std::size_t(n_fft_) + std::size_t(hop_) * (T - 1);
  std::vector<double> env(n_ola, 0.0);  // Σ_t w²[i − t·hop]
  for (std::size_t t = 0; t < T; ++t)
    for (int n = win_offset_; n < win_offset_ + win_length_; ++n)
      env[t * std::size_t(hop_) + std::size_t(n)] += double(window_[std::size_t(n)]) * window_[std::size_t(n)];
  std::vector<double> folded(length, 0.0);
  const std::size_t p = std::size_t(pad());
  for (std::size_t i = 0; i < n_ola; ++i) {
    const bool centre = i >= p && i < p + length;
    if (centre) folded[i - p] += env[i];
    else if (edges == IstftEdges::fold) folded[reflect_index(std::ptrdiff_t(i), length)] += env[i];
  }
  inv_env_.resize(length);
  for (std::size_t j = 0; j < length; ++j) inv_env_[j] = folded[j] > 1e-10 ? float(1.0 / folded[j]) : 0.0f;
  env_frames_ = T;
  env_length_ = length;
  env_edges_ = edges;
  env_valid_ = true;
}

void Stft::normalize_ola(const std::vector<float>& ola, std::size_t T, std::size_t length,
                         IstftEdges edges, float* out) {
  update_envelope(T, length, edges);
  const std::size_t p = std::size_t(pad());
  const std::size_t n_ola = std::min(ola.size(), std::size_t(n_fft_) + std::size_t(hop_) * (T - 1));
  for (std::size_t j = 0; j < length; ++j) out[j] = p + j < n_ola ? ola[p + j] : 0.0f;
  if (edges == IstftEdges::fold) {
    for (std::size_t i = 0; i < std::min(p, n_ola); ++i) out[reflect_index(std::ptrdiff_t(i), length)] += ola[i];
    for (std::size_t i = p + length; i < n_ola; ++i) out[reflect_index(std::ptrdiff_t(i), length)] += ola[i];
  }
  for (std::size_t j = 0; j < length; ++j) out[j] *= inv_env_[j];
}

std::vector<float> Stft::inverse(const Eigen::MatrixXcf& spec, std::size_t length, IstftEdges edges) {
  std::vector<float> out;
  inverse(spec, length, out, edges);
  return out;
}

void Stft::inverse(const Eigen::MatrixXcf& spec, std::size_t length, std::vector<float>& out,
                   IstftEdges edges) {
  if (spec.rows() != n_bins())
    throw Error("istft expects " + std::to_string(n_bins()) + " bins, got " + std::to_string(spec.rows()));
  if (spec.cols() == 0) throw Error("cannot invert an stft with no frames");
  const std::size_t T = std::size_t(spec.cols());
  if (length == 0) length = std::size_t(hop_) * (T - 1);
  if (length == 0) length = 1;
  overlap_add(spec, ola_);
  out.resize(length);
  normalize_ola(ola_, T, length, edges, out.data());
}

void magnitude(const std::complex<float>* bins, std::size_t n, float* out) {
  // Squares in a plain loop (vectorised), then IEEE roots W at a time. Every root is correctly
  // rounded, so the result does not depend on how the buffers happen to be aligned.
  const float* __restrict p = reinterpret_cast<const float*>(bins);
  float* __restrict o = out;
  for (std::size_t k = 0; k < n; ++k) o[k] = p[2 * k] * p[2 * k] + p[2 * k + 1] * p[2 * k + 1];
  for (std::size_t k = 0; k < n; k += kFftLanes) {
    const std::size_t len = std::min<std::size_t>(kFftLanes, n - k);
    LaneVec v{};
    std::memcpy(&v, out + k, len * sizeof(float));
    v = lane_sqrt(v);
    std::memcpy(out + k, &v, len * sizeof(float));
  }
}

Eigen::MatrixXf magnitude(const Eigen::MatrixXcf& spec) {
  Eigen::MatrixXf out(spec.rows(), spec.cols());
  magnitude(spec.data(), std::size_t(spec.size()), out.data());
  return out;
}

}  // namespace tessera::audio
