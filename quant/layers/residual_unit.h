// residual_unit.h — y = x + Conv1d_k1(ELU(Conv1d_k3,dilation d(ELU(x)))), both convs C→C.
// B batch, C channels, T frames. The dilated conv uses "same" padding, so T is kept.
#pragma once
#include <random>
#include <string>

#include "quant/layers/conv1d.h"
#include "quant/param_slab.h"
#include "quant/tensor.h"

namespace tessera::quant {

struct ResidualUnit {
  Conv1d conv_dil;  // k taps, dilation d, padding (k − 1)·d / 2
  Conv1d conv_1x1;

  // What forward keeps for backward, [B, C, T] each.
  struct Acts {
    PaddedTensor a1;  // elu(x), margin d·(k − 1)/2 (the dilated conv's input)
    PaddedTensor a2;  // elu(conv_dil(a1)), the 1×1 conv's input
  };
  // Backward temporaries (reused by every unit of a lane).
  struct Scratch {
    PaddedTensor g2;  // dL/d(conv_dil output)
    PaddedTensor g1;  // dL/da1 (margins collect garbage)
  };

  ResidualUnit() = default;
  // Registers "<name>.conv_dil.{w,b}" and "<name>.conv_1x1.{w,b}".
  ResidualUnit(ParamSlab& slab, const std::string& name, int channels, int dilation, int kernel = 3);
  void init(ParamSlab& slab, std::mt19937_64& rng) const;

  // y = unit(x); y may be x (in place). Reshapes acts to x's shape.
  void forward(const SeqView& y, const CSeqView& x, Acts& acts, const ParamView& p) const;
  // dx += dL/dx for dy = dL/dy, and parameter gradients into p. dx may be dy (then the
  // buffer goes from dL/dy to dL/dx). acts are those of the matching forward.
  void backward(const SeqView& dx, const CSeqView& dy, const Acts& acts, Scratch& scratch,
                const ParamView& p) const;
};

}  // namespace tessera::quant
