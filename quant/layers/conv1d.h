// conv1d.h — 1-D convolution over time (cross-correlation, as torch.nn.Conv1d), as GEMMs.
// B batch, C channels, T frames, k taps, d dilation, s stride.
//   x: [B, C_in, T_in] → y: [B, C_out, T_out],
//   T_out = (T_in + pad_left + pad_right − d·(k − 1) − 1) / s + 1   (floor division)
//   y[b, o, t] = bias[o] + Σ_{j, i} w[o, j, i] · x[b, i, s·t + d·j − pad_left]  (x = 0 outside)
// Weights are stored (C_out, k, C_in) row-major: torch's (C_out, C_in, k) with the last two
// axes swapped, so tap j is a C_out×C_in block and, with d = 1, the k·C_in values a column
// needs are k consecutive channels-last frames: the im2col matrix is a strided view of x
// itself (no copy). With d > 1 the product is a sum of k shifted GEMMs instead.
#pragma once
#include <random>
#include <string>

#include "quant/param_slab.h"
#include "quant/tensor.h"

namespace tessera::quant {

struct Conv1dShape {
  int c_in = 0, c_out = 0, k = 1, stride = 1, dilation = 1, pad_left = 0, pad_right = 0;

  // PyTorch padding = (k − 1)·d / 2 on both sides (odd k): T_out = T_in at stride 1.
  static Conv1dShape same(int c_in, int c_out, int k, int dilation = 1);
  // Left padding (k − 1)·d, none on the right: y[t] sees x up to t only.
  static Conv1dShape causal(int c_in, int c_out, int k, int dilation = 1);
  // Explicit symmetric padding, e.g. padded(C, C, 4, 2, 1) halves T (the down-sampling conv).
  static Conv1dShape padded(int c_in, int c_out, int k, int stride, int pad, int dilation = 1);

  int out_frames(int t_in) const;
  // Margin frames x and dx views need: max(pad_left, pad_right).
  int margin() const { return pad_left > pad_right ? pad_left : pad_right; }
};

// What forward does with the product P = conv(x) + bias.
enum class Epilogue {
  none,        // y = P
  elu,         // y = elu(P)   (the ELU that follows this conv, fused)
  accumulate,  // y += P       (residual add: y holds the skip input)
};

struct Conv1d {
  Conv1dShape s;
  ParamRef w, b;  // w: (C_out, k, C_in), b: (C_out)

  Conv1d() = default;
  // Registers "<name>.w" and "<name>.b" in the slab.
  Conv1d(ParamSlab& slab, const std::string& name, const Conv1dShape& shape);
  // PyTorch's default init (layers/init.h), fan_in = C_in·k.
  void init(ParamSlab& slab, std::mt19937_64& rng) const;

  // y = epilogue(conv(x) + bias). x needs margin() zero frames; y.T == s.out_frames(x.T).
  void forward(const SeqView& y, const CSeqView& x, const ParamView& p, Epilogue e = Epilogue::none) const;
  // Accumulates dL/dw and dL/db into p's gradients and, when dx is non-null, dL/dx into
  // *dx (+=, its margin() frames on each side receive garbage). dy is read in its frames
  // only; x is the forward input (margins zero).
  void backward(const SeqView* dx, const CSeqView& dy, const CSeqView& x, const ParamView& p) const;
};

}  // namespace tessera::quant
