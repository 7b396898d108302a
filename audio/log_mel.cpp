// log_mel.cpp — framing, magnitude, sparse mel and log per frame without temporaries.
// M mels, F bins, T frames.
#include "audio/log_mel.h"

#include <algorithm>
#include <cmath>
#include <string>

#include "audio/error.h"

namespace tessera::audio {

static float checked_floor(double floor) {
  if (!(floor > 0.0)) throw Error("log_floor must be positive, got " + std::to_string(floor));
  return float(floor);
}

LogMel::LogMel(const AudioConfig& cfg)
    : stft_(cfg),
      mel_(cfg, MelFilterbank::Inverse::without),
      floor_(checked_floor(cfg.log_floor)),
      bins_(std::size_t(stft_.n_bins())),
      mag_(std::size_t(stft_.n_bins())) {}

Eigen::MatrixXf LogMel::compute(const std::vector<float>& samples) {
  Eigen::MatrixXf out;
  compute(samples.data(), samples.size(), out);
  return out;
}

void LogMel::compute(const float* samples, std::size_t length, Eigen::MatrixXf& out) {
  if (length == 0) throw Error("cannot compute log-mel features of an empty signal");
  const std::size_t T = stft_.n_frames(length), hop = std::size_t(stft_.hop_length());
  stft_.reflect_pad(samples, length, padded_);
  out.resize(mel_.n_mels(), Eigen::Index(T));
  for (std::size_t t = 0; t < T; ++t) frame(padded_.data() + t * hop, out.col(Eigen::Index(t)).data());
}

void LogMel::frame(const float* padded_frame, float* col) {
  stft_.analyze_frame(padded_frame, bins_.data());
  magnitude(bins_.data(), bins_.size(), mag_.data());
  mel_.apply(mag_.data(), col);
  for (int m = 0; m < mel_.n_mels(); ++m) col[m] = std::log(std::max(col[m], floor_));
}

void LogMel::from_magnitude(const Eigen::MatrixXf& mag, Eigen::MatrixXf& out) const {
  mel_.apply(mag, out);
  out = out.array().max(floor_).log().matrix();
}

Eigen::MatrixXf log_mel(const AudioConfig& cfg, const std::vector<float>& samples) {
  return LogMel(cfg).compute(samples);
}

}  // namespace tessera::audio
