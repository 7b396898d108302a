// decoder.cpp — the decoder's layer list, its forward/backward per lane, and the lane split.
// B batch, M mels, C channels, D latent dims, L latent frames, S number of up stages.
#include "quant/decoder.h"

#include <algorithm>
#include <cassert>

#include "quant/lanes.h"
#include "quant/layers/elu.h"

namespace tessera::quant {

Decoder::Decoder(const ModelConfig& cfg, ParamSlab& slab, ThreadPool& pool, const std::string& name)
    : cfg_(cfg), pool_(pool) {
  cfg_.validate();
  const int C = cfg_.channels;
  const std::size_t begin = slab.count();
  conv_in_ = Conv1d(slab, name + ".conv_in", Conv1dShape::same(cfg_.latent_dim, C, cfg_.kernel_in));
  for (std::size_t i = 0; i < cfg_.strides.size(); ++i) {
    const std::string sn = name + ".stage" + std::to_string(i);
    const int s = cfg_.strides[cfg_.strides.size() - 1 - i];  // mirror: last down stage first
    Stage st;
    st.up = ConvTranspose1d(slab, sn + ".up",
                            {C, C, ModelConfig::stage_kernel(s), s, ModelConfig::stage_pad(s), 0});
    for (std::size_t j = 0; j < cfg_.dilations.size(); ++j)
      st.units.emplace_back(slab, sn + ".unit" + std::to_string(j), C, cfg_.dilations[j], cfg_.residual_kernel);
    stages_.push_back(std::move(st));
  }
  conv_out_ = Conv1d(slab, name + ".conv_out", Conv1dShape::same(C, cfg_.n_mels, cfg_.decoder_kernel_out));
  range_ = {begin, slab.count() - begin};
  lanes_.resize(std::size_t(pool_.size()));
}

void Decoder::init(ParamSlab& slab, std::mt19937_64& rng) const {
  conv_in_.init(slab, rng);
  for (const Stage& st : stages_) {
    st.up.init(slab, rng);
    for (const ResidualUnit& u : st.units) u.init(slab, rng);
  }
  conv_out_.init(slab, rng);
}

int Decoder::out_frames(int L) const {
  L = conv_in_.s.out_frames(L);
  for (const Stage& st : stages_) L = st.up.s.out_frames(L);
  return conv_out_.s.out_frames(L);
}

void Decoder::reserve(int B, int L, ParamSlab& slab) {
  Tensor z(B, cfg_.latent_dim, L), y, dz;
  z.zero();
  forward(z, y, slab, true);
  y.zero();
  backward(y, dz, slab);
}

// Walks the layers backwards: a conv maps outputs [lo, hi) to inputs
// [s·lo − pad_left, s·(hi − 1) − pad_left + d·(k − 1) + 1); a transposed conv (output
// s·t + j − p) to inputs [⌈(lo + p − k + 1)/s⌉, ⌊(hi − 1 + p)/s⌋ + 1).
void Decoder::input_range(int lo, int hi, int L, int& a, int& b) const {
  auto back = [&](const Conv1dShape& s) {
    lo = s.stride * lo - s.pad_left;
    hi = s.stride * (hi - 1) - s.pad_left + s.dilation * (s.k - 1) + 1;
  };
  auto floor_div = [](int x, int y) { return x >= 0 ? x / y : -((-x + y - 1) / y); };
  back(conv_out_.s);
  for (auto st = stages_.rbegin(); st != stages_.rend(); ++st) {
    for (auto u = st->units.rbegin(); u != st->units.rend(); ++u) back(u->conv_dil.s);
    const ConvTranspose1dShape& s = st->up.s;
    lo = -floor_div(-(lo + s.pad - s.k + 1), s.stride);
    hi = floor_div(hi - 1 + s.pad, s.stride) + 1;
  }
  back(conv_in_.s);
  a = std::max(0, lo);
  b = std::min(L, std::max(hi, a + 1));
}

void Decoder::forward_lane(Lane& Ln, const CSeqView& x, const SeqView& y, const ParamView& p, bool train) const {
  const int B = x.B, C = cfg_.channels, S = int(stages_.size());
  Ln.y.resize(std::size_t(S) + 1);
  Ln.e.resize(std::size_t(S) + 1);
  Ln.acts.resize(std::size_t(S));
  for (int i = 0; i < S; ++i) Ln.acts[i].resize(stages_[i].units.size());
  // Margin of e[r], the input of the conv that follows resolution r.
  auto e_margin = [&](int r) { return r < S ? stages_[r].up.s.margin() : conv_out_.s.margin(); };

  Ln.x.reshape(B, cfg_.latent_dim, x.T, conv_in_.s.margin(), Layout::interleaved);
  copy_frames(Ln.x.view(), x);
  int T = conv_in_.s.out_frames(x.T);
  Ln.e[0].reshape(B, C, T, e_margin(0), Layout::interleaved);
  conv_in_.forward(Ln.e[0].view(), Ln.x.view(), p, Epilogue::elu);
  for (int i = 0; i < S; ++i) {
    const Stage& st = stages_[i];
    T = st.up.s.out_frames(T);
    Ln.y[i + 1].reshape(B, C, T, 0, Layout::interleaved);
    const SeqView yv = Ln.y[i + 1].view();
    st.up.forward(yv, Ln.e[i].view(), p);
    for (std::size_t u = 0; u < st.units.size(); ++u)
      st.units[u].forward(yv, yv, train ? Ln.acts[i][u] : Ln.acts[0][0], p);
    Ln.e[i + 1].reshape(B, C, T, e_margin(i + 1), Layout::interleaved);
    elu_forward(Ln.e[i + 1].view(), yv);
  }
  Ln.io.reshape(B, cfg_.n_mels, y.T, 0, Layout::interleaved);
  conv_out_.forward(Ln.io.view(), Ln.e[S].view(), p);
  copy_frames(y, Ln.io.view());
}

void Decoder::backward_lane(Lane& Ln, const CSeqView& dy, const SeqView& dzq, const ParamView& p) const {
  const int S = int(stages_.size());
  PaddedTensor* g = &Ln.ga;
  PaddedTensor* other = &Ln.gb;
  auto grad_like = [](PaddedTensor& t, const PaddedTensor& like) {
    t.reshape_like(like);
    t.zero();
  };
  grad_like(*g, Ln.e[S]);
  SeqView gv = g->view();
  Ln.io.reshape(dy.B, dy.C, dy.T, 0, Layout::interleaved);
  copy_frames(Ln.io.view(), dy);
  conv_out_.backward(&gv, Ln.io.view(), Ln.e[S].view(), p);
  // Loop invariant: *g holds dL/de[i + 1].
  for (int i = S - 1; i >= 0; --i) {
    gv = g->view();
    elu_backward_inplace(gv, Ln.e[i + 1].view());
    for (std::size_t u = stages_[i].units.size(); u-- > 0;)
      stages_[i].units[u].backward(gv, gv, Ln.acts[i][u], Ln.scratch, p);
    grad_like(*other, Ln.e[i]);
    SeqView ov = other->view();
    stages_[i].up.backward(&ov, g->view(), Ln.e[i].view(), p);
    std::swap(g, other);
  }
  gv = g->view();
  elu_backward_inplace(gv, Ln.e[0].view());
  grad_like(Ln.gx, Ln.x);
  SeqView xv = Ln.gx.view();
  conv_in_.backward(&xv, g->view(), Ln.x.view(), p);
  copy_frames(dzq, xv);
}

void Decoder::forward(const Tensor& zq, Tensor& y, const ParamSlab& slab, bool train) {
  if (zq.C() != cfg_.latent_dim)
    throw Error("decoder input has " + std::to_string(zq.C()) + " channels, expected latent_dim " +
                std::to_string(cfg_.latent_dim));
  const int B = zq.B(), L = zq.T(), T = out_frames(L), hop = cfg_.hop();
  if (L < 1) throw Error("decoder input has no frames");
  y.resize(B, cfg_.n_mels, T);
  const ParamView p{slab.params(), nullptr, 0};
  const int n_lanes = int(lanes_.size());
  have_train_forward_ = train;
  batch_ = B, frames_ = L;

  // One long item at inference: split its latent frames over the lanes.
  if (!train && B == 1 && n_lanes > 1 && L >= 8 * n_lanes) {
    pool_.run([&](int l) {
      const int lo = L * l / n_lanes, hi = L * (l + 1) / n_lanes;
      int a, b;
      input_range(lo * hop, hi * hop, L, a, b);
      CSeqView xs = zq.view();
      xs.data = zq.frame(0, a), xs.T = b - a;
      forward_chunk(l, xs, a, lo, hi, y.frame(0, lo * hop), slab);
    });
    return;
  }
  pool_.run([&](int l) {
    Lane& Ln = lanes_[std::size_t(l)];
    const LaneItems it = lane_items(B, l, n_lanes);
    Ln.b0 = it.b0, Ln.nb = it.nb;
    if (Ln.nb == 0) return;
    forward_lane(Ln, zq.view().items(Ln.b0, Ln.nb), y.view().items(Ln.b0, Ln.nb), p, train);
  });
}

void Decoder::forward_chunk(int lane, const CSeqView& x, int a, int lo, int hi, float* y, const ParamSlab& slab) {
  assert(x.B == 1 && x.C == cfg_.latent_dim && lo >= a);
  Lane& Ln = lanes_[std::size_t(lane)];
  const ParamView p{slab.params(), nullptr, 0};
  const int hop = cfg_.hop();
  Ln.chunk.resize(1, cfg_.n_mels, out_frames(x.T));
  assert((hi - a) * hop <= Ln.chunk.T());
  forward_lane(Ln, x, Ln.chunk.view(), p, false);
  std::copy_n(Ln.chunk.frame(0, (lo - a) * hop), std::size_t(hi - lo) * hop * cfg_.n_mels, y);
}

void Decoder::backward(const Tensor& dy, Tensor& dzq, ParamSlab& slab) {
  if (!have_train_forward_) throw Error("decoder backward needs a training forward first");
  if (dy.B() != batch_ || dy.C() != cfg_.n_mels || dy.T() != out_frames(frames_))
    throw Error("decoder backward: gradient shape [" + std::to_string(dy.B()) + ", " + std::to_string(dy.C()) +
                ", " + std::to_string(dy.T()) + "] does not match the last forward");
  dzq.resize(batch_, cfg_.latent_dim, frames_);
  try {
    pool_.run([&](int l) {
      Lane& Ln = lanes_[std::size_t(l)];
      if (Ln.nb == 0) return;
      backward_lane(Ln, dy.view().items(Ln.b0, Ln.nb), dzq.view().items(Ln.b0, Ln.nb),
                    lane_params(slab, range_, l, Ln.grads));
    });
  } catch (...) {
    clear_lane_grads(lanes_);
    throw;
  }
  reduce_lane_grads(pool_, slab, range_, lanes_);
}

}  // namespace tessera::quant
