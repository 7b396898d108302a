// log_mel.h — log-mel features: natural log of the mel filterbank applied to the STFT magnitude.
// M mels, F bins, T frames (T = 1 + floor(L / hop), see stft.h).
//   LogMel lm(cfg);  Eigen::MatrixXf feats = lm.compute(samples);   // M x T
// Each entry is ln(max(Σ_k M[m,k]·|X[k,t]|, log_floor)); magnitude, not power.
#pragma once
#include <Eigen/Core>
#include <complex>
#include <vector>

#include "audio/audio_config.h"
#include "audio/mel.h"
#include "audio/stft.h"

namespace tessera::audio {

class LogMel {
 public:
  explicit LogMel(const AudioConfig& cfg);  // throws tessera::Error on a bad config

  // samples (L ≥ 1) -> M x T. Allocation-free per frame; out is resized.
  Eigen::MatrixXf compute(const std::vector<float>& samples);
  void compute(const float* samples, std::size_t length, Eigen::MatrixXf& out);
  // One frame: N padded samples (frame t of the reflect-padded signal, stft.h) -> M values
  // in col. compute() and LogMelStream both use it, so their frames agree bit for bit.
  void frame(const float* padded_frame, float* col);
  // |X| (F x T) -> M x T.
  void from_magnitude(const Eigen::MatrixXf& mag, Eigen::MatrixXf& out) const;

  Stft& stft() { return stft_; }
  const MelFilterbank& filterbank() const { return mel_; }
  float log_floor() const { return floor_; }

 private:
  Stft stft_;
  MelFilterbank mel_;
  float floor_;
  std::vector<float> padded_;              // L + N
  std::vector<std::complex<float>> bins_;  // F
  std::vector<float> mag_;                 // F
};

// One-shot convenience: LogMel(cfg).compute(samples).
Eigen::MatrixXf log_mel(const AudioConfig& cfg, const std::vector<float>& samples);

}  // namespace tessera::audio
