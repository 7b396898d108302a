// elu.h — exponential linear unit with α = 1 (Clevert, Unterthiner & Hochreiter, ICLR 2016).
// y = x for x > 0, e^x − 1 otherwise. Its derivative is 1 for x > 0 and e^x = y + 1
// otherwise, so the backward pass needs only the output y, never the input.
#pragma once
#include <cstddef>

#include "quant/tensor.h"

namespace tessera::quant {

// y = elu(x) over n values; y may equal x.
void elu_forward(float* y, const float* x, std::size_t n);
// dx += dy · elu'(·), with elu' taken from the forward output y; dx may equal dy only
// through elu_backward_inplace.
void elu_backward(float* dx, const float* dy, const float* y, std::size_t n);
// d ← d · elu'(·) in place (a gradient arriving at the ELU output becomes the one at its input).
void elu_backward_inplace(float* d, const float* y, std::size_t n);

// The same over the frames of every item (margins untouched).
void elu_forward(const SeqView& y, const CSeqView& x);
void elu_backward(const SeqView& dx, const CSeqView& dy, const CSeqView& y);
void elu_backward_inplace(const SeqView& d, const CSeqView& y);

}  // namespace tessera::quant
