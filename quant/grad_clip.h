// grad_clip.h — global gradient-norm clipping over the flat gradient slab.
// The norm is the L2 norm of all gradients together (Pascanu, Mikolov & Bengio 2013, Alg. 1).
// Rule of torch.nn.utils.clip_grad_norm_: c = max_norm / (norm + 1e-6); if c < 1, g ← c·g
// (the 1e-6 guards a zero norm).
// n: length of the flat gradient slab.
#pragma once
#include <cstddef>

namespace tessera::quant {

// L2 norm of g[0..n), accumulated in double.
double grad_norm(const float* g, std::size_t n);

// Clips in place and returns the norm before clipping. A non-finite norm (inf/NaN gradients)
// leaves g untouched; the caller should skip that step. Throws tessera::Error if
// max_norm <= 0 (pass +inf to never clip).
//   double norm = clip_grad_norm(grads, n, 1.0);
double clip_grad_norm(float* g, std::size_t n, double max_norm);

}  // namespace tessera::quant
