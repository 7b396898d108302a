// spectrogram_image.h — log-mel pictures for the report: low bands at the bottom, time to
// the right, levels in dB through the tidepool colour map on a scale shared by all the
// versions of one input so that they compare by eye.
#pragma once
#include <cstdint>
#include <vector>

#include <Eigen/Core>

namespace tessera::cli {

struct DbScale {
  double lo_db = -80, hi_db = 0;
};

// dB of a natural-log magnitude: 20 · log10(e^v) = (20 / ln 10) · v.
double log_mel_to_db(double v);

// From the loudest value of all `mels` (natural-log, M x T) down `range_db`.
DbScale shared_db_scale(const std::vector<const Eigen::MatrixXf*>& mels, double range_db = 80);

struct RgbImage {
  int width = 0, height = 0;
  std::vector<std::uint8_t> rgb;  // top row first
};

// `frames` columns wide (frames past the end of log_mel are drawn as the quietest level,
// so pictures of one input share a time axis), each band `band_px` pixels tall.
RgbImage spectrogram_image(const Eigen::MatrixXf& log_mel, int frames, const DbScale& scale, int band_px = 2);

}  // namespace tessera::cli
