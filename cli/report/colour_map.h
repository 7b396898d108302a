// colour_map.h — the report's colour map for spectrograms ("tidepool": deep blue-black
// through teal and sand to near white). Its luminance rises monotonically from the first
// stop to the last, so a grey-scale print keeps the order of levels.
#pragma once
#include <array>
#include <cstdint>

namespace tessera::cli {

using Rgb = std::array<std::uint8_t, 3>;

// t in [0, 1] (clamped) → colour; 0 is the quietest level, 1 the loudest.
Rgb tidepool(double t);

// Relative luminance of an sRGB colour with ITU-R BT.709 coefficients on the linearised
// channels (IEC 61966-2-1 transfer function): 0 black … 1 white.
double relative_luminance(const Rgb& c);

}  // namespace tessera::cli
