// mel_inverse.h — from log-mel back to audio: linear-magnitude estimates and the inversion entry point.
// M mels, F bins, T frames, L samples.
//
// Estimates of the linear magnitude A (F x T) from a linear mel (M x T, mel = exp(log-mel)):
//  - pinv_start: A₀ = max(M⁺·mel, 0), the clipped Moore–Penrose pseudo-inverse.
//  - nnls_magnitude: projected gradient for min ‖M·a − mel‖² s.t. a ≥ 0 per frame, from A₀,
//    a ← max(a − Mᵀ(M·a − mel)/L, 0) with L = λ_max(MᵀM) (a descent step for a 1/L step size).
//    Deliberately not an active-set (Lawson–Hanson) solver: that fits the mel with at most
//    n_mels non-zero bins per frame, which sounds far worse (DESIGN.md).
//
// invert_log_mel dispatches on cfg.inversion:
//   mel_consistent  A₀, then fast GL re-imposing the mel every iteration (default)
//   fast            A₀ fixed, fast GL          plain   A₀ fixed, plain GL
//   nnls            NNLS magnitude fixed, fast GL
// The start phase is zero: on synthesised (espeak-ng) speech at 16 kHz, 32–100 iterations, it
// gave equal or lower SC and MCD than seeded random phase for every variant.
#pragma once
#include <Eigen/Core>
#include <functional>
#include <vector>

#include "audio/audio_config.h"
#include "audio/griffin_lim.h"
#include "audio/mel.h"

namespace tessera::audio {

Eigen::MatrixXf pinv_start(const MelFilterbank& fb, const Eigen::MatrixXf& mel);
Eigen::MatrixXf nnls_magnitude(const MelFilterbank& fb, const Eigen::MatrixXf& mel,
                               const Eigen::MatrixXf& start, int iters);

// Reusable inverter: keeps the filterbank (with its pseudo-inverse) and the Griffin-Lim buffers.
//   MelInverter inv(cfg);  std::vector<float> y = inv.invert(log_mel, n_samples);
class MelInverter {
 public:
  explicit MelInverter(const AudioConfig& cfg);  // throws tessera::Error on a bad config
  // log_mel (M x T, natural log) -> L samples; length 0 means hop·(T − 1), otherwise
  // 1 + floor(length / hop) must equal T. progress(iter, total) after each GL iteration.
  std::vector<float> invert(const Eigen::MatrixXf& log_mel, std::size_t length,
                            const std::function<void(int iter, int total)>& progress = {});
  const MelFilterbank& filterbank() const { return fb_; }
  GriffinLimOptions& options() { return opt_; }  // iterations, momentum, start phase

 private:
  AudioConfig cfg_;
  MelFilterbank fb_;
  GriffinLim gl_;
  GriffinLimOptions opt_;
};

std::vector<float> invert_log_mel(const AudioConfig& cfg, const Eigen::MatrixXf& log_mel,
                                  std::size_t length,
                                  const std::function<void(int iter, int total)>& progress = {});

}  // namespace tessera::audio
