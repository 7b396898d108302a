// residual_unit.cpp — the dilated residual unit; its ELUs are fused into the conv passes.
// B batch, C channels, T frames.
#include "quant/layers/residual_unit.h"

#include <cassert>

#include "audio/error.h"
#include "quant/layers/elu.h"

namespace tessera::quant {

ResidualUnit::ResidualUnit(ParamSlab& slab, const std::string& name, int channels, int dilation, int kernel) {
  if (kernel % 2 == 0)
    throw Error("residual unit '" + name + "': kernel must be odd for same padding, got " + std::to_string(kernel));
  conv_dil = Conv1d(slab, name + ".conv_dil", Conv1dShape::same(channels, channels, kernel, dilation));
  conv_1x1 = Conv1d(slab, name + ".conv_1x1", Conv1dShape::same(channels, channels, 1));
}

void ResidualUnit::init(ParamSlab& slab, std::mt19937_64& rng) const {
  conv_dil.init(slab, rng);
  conv_1x1.init(slab, rng);
}

void ResidualUnit::forward(const SeqView& y, const CSeqView& x, Acts& acts, const ParamView& p) const {
  assert(x.B == y.B && x.C == y.C && x.T == y.T && x.C == conv_dil.s.c_in);
  const Layout lay = layout_of(x);
  acts.a1.reshape(x.B, x.C, x.T, conv_dil.s.margin(), lay);
  acts.a2.reshape(x.B, x.C, x.T, 0, lay);
  elu_forward(acts.a1.view(), x);
  conv_dil.forward(acts.a2.view(), acts.a1.view(), p, Epilogue::elu);
  if (y.data != x.data) copy_frames(y, x);
  conv_1x1.forward(y, acts.a2.view(), p, Epilogue::accumulate);
}

void ResidualUnit::backward(const SeqView& dx, const CSeqView& dy, const Acts& acts, Scratch& scratch,
                            const ParamView& p) const {
  const CSeqView a1 = acts.a1.view(), a2 = acts.a2.view();
  assert(dy.B == a1.B && dy.C == a1.C && dy.T == a1.T && dx.B == dy.B && dx.T == dy.T);
  scratch.g2.reshape(dy.B, dy.C, dy.T, 0, acts.a2.layout());
  scratch.g2.zero();
  const SeqView g2 = scratch.g2.view();
  conv_1x1.backward(&g2, dy, a2, p);
  elu_backward_inplace(g2, a2);
  scratch.g1.reshape(dy.B, dy.C, dy.T, conv_dil.s.margin(), acts.a1.layout());
  scratch.g1.zero();
  const SeqView g1 = scratch.g1.view();
  conv_dil.backward(&g1, g2, a1, p);
  // dy is read for the last time above, so dx may share its buffer.
  if (dx.data != dy.data) add_frames(dx, dy);
  elu_backward(dx, g1, a1);
}

}  // namespace tessera::quant
