// resample.cpp — libsoxr one-shot conversion.
#include "audio/resample.h"

#include <cmath>
#include <string>

#include <soxr.h>

#include "audio/error.h"

namespace tessera::audio {

std::vector<float> resample(const std::vector<float>& x, int from, int to) {
  if (from <= 0 || to <= 0)
    throw Error("cannot resample from " + std::to_string(from) + " Hz to " + std::to_string(to) +
                " Hz: rates must be positive");
  if (from == to || x.empty()) return x;
  const std::size_t out_len = std::size_t(std::llround(double(x.size()) * to / from));
  std::vector<float> y(out_len);
  soxr_io_spec_t io = soxr_io_spec(SOXR_FLOAT32_I, SOXR_FLOAT32_I);
  soxr_quality_spec_t q = soxr_quality_spec(SOXR_HQ, 0);
  std::size_t done = 0;
  soxr_error_t err = soxr_oneshot(from, to, 1, x.data(), x.size(), nullptr, y.data(), out_len,
                                  &done, &io, &q, nullptr);
  if (err) throw Error(std::string("resampling failed: ") + err);
  y.resize(done);
  y.resize(out_len, 0.0f);  // soxr may deliver a few samples fewer at the very end
  return y;
}

}  // namespace tessera::audio
