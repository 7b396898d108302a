// spectrogram_image.cpp — one pixel column per feature frame.
#include "cli/report/spectrogram_image.h"

#include <algorithm>
#include <cmath>
#include <numbers>

#include "cli/report/colour_map.h"

namespace tessera::cli {

double log_mel_to_db(double v) { return 20.0 / std::numbers::ln10 * v; }

DbScale shared_db_scale(const std::vector<const Eigen::MatrixXf*>& mels, double range_db) {
  double hi = -1e300;
  for (const auto* m : mels)
    if (m && m->size()) hi = std::max(hi, log_mel_to_db(double(m->maxCoeff())));
  if (hi == -1e300) hi = 0;
  hi = std::ceil(hi / 10) * 10;  // round up to a whole 10 dB so the colour bar labels are tidy
  return {hi - range_db, hi};
}

RgbImage spectrogram_image(const Eigen::MatrixXf& log_mel, int frames, const DbScale& scale, int band_px) {
  RgbImage img;
  const int M = int(log_mel.rows());
  img.width = std::max(1, frames);
  img.height = std::max(1, M * band_px);
  img.rgb.assign(std::size_t(img.width) * std::size_t(img.height) * 3, 0);
  const Rgb quiet = tidepool(0);
  const double span = scale.hi_db - scale.lo_db;
  for (int y = 0; y < img.height; ++y) {
    const int band = M - 1 - y / band_px;  // top row shows the highest band
    std::uint8_t* row = img.rgb.data() + std::size_t(y) * std::size_t(img.width) * 3;
    for (int t = 0; t < img.width; ++t) {
      Rgb c = quiet;
      if (band >= 0 && t < log_mel.cols()) c = tidepool((log_mel_to_db(log_mel(band, t)) - scale.lo_db) / span);
      row[3 * t] = c[0], row[3 * t + 1] = c[1], row[3 * t + 2] = c[2];
    }
  }
  return img;
}

}  // namespace tessera::cli
