// init.h — PyTorch's default initialisation of convolution weights and biases.
// kaiming_uniform_(w, a = √5) has bound gain·√(3/fan_in) with gain = √(2/(1 + a²)) = √(1/3),
// i.e. U(−1/√fan_in, 1/√fan_in); the bias uses the same bound (torch.nn.Conv1d.reset_parameters,
// torch 1.13 source). Draws are our own (53-bit uniforms from the caller's mt19937_64), so
// values are reproducible across platforms but do not match torch's generator.
#pragma once
#include <cmath>
#include <random>
#include <span>

namespace tessera::quant {

inline void fill_uniform(std::span<float> v, double bound, std::mt19937_64& rng) {
  for (float& x : v) {
    const double u = double(rng() >> 11) * 0x1.0p-53;  // [0, 1)
    x = float((2.0 * u - 1.0) * bound);
  }
}

inline double torch_default_bound(int fan_in) { return 1.0 / std::sqrt(double(fan_in)); }

}  // namespace tessera::quant
