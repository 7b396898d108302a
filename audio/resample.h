// resample.h — sample-rate conversion with libsoxr (high-quality preset, linear phase).
#pragma once
#include <vector>

namespace tessera::audio {

// Returns `x` (at rate `from`) converted to rate `to`; a copy when the rates agree.
// Output length is round(len · to / from). Throws tessera::Error on invalid rates.
std::vector<float> resample(const std::vector<float>& x, int from, int to);

}  // namespace tessera::audio
