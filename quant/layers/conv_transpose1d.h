// conv_transpose1d.h — transposed 1-D convolution (as torch.nn.ConvTranspose1d, dilation 1),
// computed by phases so that every output frame is written once, with no col2im scatter.
// B batch, C channels, T frames, k taps, s stride, p padding.
//   x: [B, C_in, T_in] → y: [B, C_out, T_out],  T_out = (T_in − 1)·s − 2p + k + output_padding
//   y[b, o, s·t + j − p] += w[o, j, i] · x[b, i, t]  for every t, j (outputs outside dropped)
// Weights are stored (C_out, k, C_in) row-major; torch stores (C_in, C_out, k).
// Phase r (output frames s·m + r) gets taps j ≡ r + p (mod s), each from input frame
// m + (r + p − j)/s: one GEMM per tap over a strided output view.
#pragma once
#include <random>
#include <string>

#include "quant/param_slab.h"
#include "quant/tensor.h"

namespace tessera::quant {

struct ConvTranspose1dShape {
  int c_in = 0, c_out = 0, k = 1, stride = 1, pad = 0, output_padding = 0;

  int out_frames(int t_in) const { return (t_in - 1) * stride - 2 * pad + k + output_padding; }
  // Margin frames x and dx views need (bounds for any T_in).
  int margin() const;
};

struct ConvTranspose1d {
  ConvTranspose1dShape s;
  ParamRef w, b;  // w: (C_out, k, C_in), b: (C_out)

  ConvTranspose1d() = default;
  ConvTranspose1d(ParamSlab& slab, const std::string& name, const ConvTranspose1dShape& shape);
  // PyTorch's default init; torch takes fan_in from weight dim 1, which for a transposed
  // conv is C_out, so fan_in = C_out·k (torch.nn.init._calculate_fan_in_and_fan_out).
  void init(ParamSlab& slab, std::mt19937_64& rng) const;

  // y = convT(x) + bias. x needs margin() zero frames.
  void forward(const SeqView& y, const CSeqView& x, const ParamView& p) const;
  // Accumulates dL/dw, dL/db and, when dx is non-null, dL/dx (+=, margins get garbage).
  void backward(const SeqView* dx, const CSeqView& dy, const CSeqView& x, const ParamView& p) const;
};

}  // namespace tessera::quant
