// float_buffer.h — the storage of every float array that Eigen maps (tensors, parameters,
// gradients, optimiser moments, codebooks).
//
// Eigen chooses per call between scalar code for an unaligned head and packet code for
// the rest by the address of the data (a Map's sum(), a partial reduction into a mapped
// destination, a lazy product's coefficients), and the two parts add in different orders.
// With malloc's 16-byte alignment and AVX's 32- or 64-byte packets (-march=native), the
// same numbers at another address then round differently: two models trained with one
// seed drifted apart, and a resumed run left the uninterrupted one. Allocating on Eigen's
// own alignment (EIGEN_MAX_ALIGN_BYTES) gives a view at a given offset the same alignment
// in every object and every run.
#pragma once
#include <Eigen/Core>
#include <vector>

namespace tessera::quant {

using FloatBuffer = std::vector<float, Eigen::aligned_allocator<float>>;

}  // namespace tessera::quant
