// colour_map.cpp — piecewise-linear interpolation between hand-picked stops.
#include "cli/report/colour_map.h"

#include <algorithm>
#include <cmath>

namespace tessera::cli {

namespace {
// Stops chosen by eye for this project, each brighter than the one before.
constexpr std::array<Rgb, 7> kStops = {{{8, 10, 30},
                                        {30, 30, 90},
                                        {40, 80, 130},
                                        {30, 135, 140},
                                        {120, 175, 120},
                                        {225, 200, 120},
                                        {252, 246, 225}}};
}  // namespace

Rgb tidepool(double t) {
  if (!(t > 0)) t = 0;  // also NaN
  if (t > 1) t = 1;
  const double x = t * double(kStops.size() - 1);
  const std::size_t i = std::min(kStops.size() - 2, std::size_t(x));
  const double f = x - double(i);
  Rgb c;
  for (int k = 0; k < 3; ++k)
    c[std::size_t(k)] = std::uint8_t(std::lround((1 - f) * kStops[i][std::size_t(k)] + f * kStops[i + 1][std::size_t(k)]));
  return c;
}

double relative_luminance(const Rgb& c) {
  auto lin = [](std::uint8_t v) {
    const double s = v / 255.0;
    return s <= 0.04045 ? s / 12.92 : std::pow((s + 0.055) / 1.055, 2.4);
  };
  return 0.2126 * lin(c[0]) + 0.7152 * lin(c[1]) + 0.0722 * lin(c[2]);
}

}  // namespace tessera::cli
