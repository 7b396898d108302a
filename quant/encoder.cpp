// encoder.cpp — the encoder's layer list, its forward/backward per lane, and the lane split.
// B batch, M mels, C channels, D latent dims, T frames, S number of strided stages.
#include "quant/encoder.h"

#include <algorithm>
#include <cassert>

#include "quant/lanes.h"
#include "quant/layers/elu.h"

namespace tessera::quant {

Encoder::Encoder(const ModelConfig& cfg, ParamSlab& slab, ThreadPool& pool, const std::string& name)
    : cfg_(cfg), pool_(pool) {
  cfg_.validate();
  const int C = cfg_.channels;
  const std::size_t begin = slab.count();
  conv_in_ = Conv1d(slab, name + ".conv_in", Conv1dShape::same(cfg_.n_mels, C, cfg_.kernel_in));
  for (std::size_t i = 0; i < cfg_.strides.size(); ++i) {
    const std::string sn = name + ".stage" + std::to_string(i);
    Stage st;
    for (std::size_t j = 0; j < cfg_.dilations.size(); ++j)
      st.units.emplace_back(slab, sn + ".unit" + std::to_string(j), C, cfg_.dilations[j], cfg_.residual_kernel);
    const int s = cfg_.strides[i];
    st.down = Conv1d(slab, sn + ".down",
                     Conv1dShape::padded(C, C, ModelConfig::stage_kernel(s), s, ModelConfig::stage_pad(s)));
    stages_.push_back(std::move(st));
  }
  conv_out_ = Conv1d(slab, name + ".conv_out", Conv1dShape::same(C, cfg_.latent_dim, cfg_.kernel_out));
  range_ = {begin, slab.count() - begin};
  lanes_.resize(std::size_t(pool_.size()));
}

void Encoder::init(ParamSlab& slab, std::mt19937_64& rng) const {
  conv_in_.init(slab, rng);
  for (const Stage& st : stages_) {
    for (const ResidualUnit& u : st.units) u.init(slab, rng);
    st.down.init(slab, rng);
  }
  conv_out_.init(slab, rng);
}

int Encoder::out_frames(int T) const {
  for (const Stage& st : stages_) T = st.down.s.out_frames(T);
  return conv_out_.s.out_frames(T);
}

// One training forward and backward on zeros allocates every buffer at its largest size;
// the gradients it adds are exactly zero.
void Encoder::reserve(int B, int T, ParamSlab& slab) {
  Tensor x(B, cfg_.n_mels, T), z;
  x.zero();
  forward(x, z, slab, true);
  z.zero();
  backward(z, slab);
}

// Latent frames [lo, hi) depend on the input frames found by walking the layers backwards:
// a conv maps outputs [lo, hi) to inputs [s·lo − pad_left, s·(hi − 1) − pad_left + d·(k − 1) + 1).
void Encoder::input_range(int lo, int hi, int T, int& a, int& b) const {
  auto back = [&](const Conv1dShape& s) {
    lo = s.stride * lo - s.pad_left;
    hi = s.stride * (hi - 1) - s.pad_left + s.dilation * (s.k - 1) + 1;
  };
  back(conv_out_.s);
  for (auto st = stages_.rbegin(); st != stages_.rend(); ++st) {
    back(st->down.s);
    for (auto u = st->units.rbegin(); u != st->units.rend(); ++u) back(u->conv_dil.s);
  }
  back(conv_in_.s);
  const int hop = cfg_.hop();
  a = std::max(0, lo) / hop * hop;  // chunk starts on a latent frame boundary
  b = std::min(T, a + (std::max(hi, a + 1) - a + hop - 1) / hop * hop);
}

void Encoder::forward_lane(Lane& L, const CSeqView& x, const SeqView& z, const ParamView& p, bool train) const {
  const int B = x.B, C = cfg_.channels, S = int(stages_.size());
  L.y.resize(std::size_t(S));
  L.e.resize(std::size_t(S) + 1);
  L.acts.resize(std::size_t(S));
  for (int r = 0; r < S; ++r) L.acts[r].resize(stages_[r].units.size());
  // Margin of e[r], the input of the conv that follows resolution r.
  auto e_margin = [&](int r) { return r < S ? stages_[r].down.s.margin() : conv_out_.s.margin(); };
  auto has_units = [&](int r) { return r < S && !stages_[r].units.empty(); };
  // A conv whose output feeds only an ELU writes elu(output) straight into e[r].
  auto run_into = [&](const Conv1d& conv, const CSeqView& in, int r, int t) {
    if (has_units(r)) {
      L.y[r].reshape(B, C, t, 0, Layout::interleaved);
      conv.forward(L.y[r].view(), in, p);
    } else {
      L.e[r].reshape(B, C, t, e_margin(r), Layout::interleaved);
      conv.forward(L.e[r].view(), in, p, Epilogue::elu);
    }
  };

  L.x.reshape(B, cfg_.n_mels, x.T, conv_in_.s.margin(), Layout::interleaved);
  copy_frames(L.x.view(), x);
  int T = x.T;
  run_into(conv_in_, L.x.view(), 0, T);
  for (int r = 0; r < S; ++r) {
    const Stage& st = stages_[r];
    if (has_units(r)) {
      const SeqView y = L.y[r].view();
      for (std::size_t u = 0; u < st.units.size(); ++u)
        st.units[u].forward(y, y, train ? L.acts[r][u] : L.acts[0][0], p);
      L.e[r].reshape(B, C, T, e_margin(r), Layout::interleaved);
      elu_forward(L.e[r].view(), y);
    }
    T = st.down.s.out_frames(T);
    run_into(st.down, L.e[r].view(), r + 1, T);
  }
  L.io.reshape(B, cfg_.latent_dim, z.T, 0, Layout::interleaved);
  conv_out_.forward(L.io.view(), L.e[S].view(), p);
  copy_frames(z, L.io.view());
}

void Encoder::backward_lane(Lane& L, const CSeqView& dz, const ParamView& p) const {
  const int S = int(stages_.size());
  PaddedTensor* g = &L.ga;
  PaddedTensor* other = &L.gb;
  auto grad_like = [](PaddedTensor& t, const PaddedTensor& like) {
    t.reshape_like(like);
    t.zero();
  };
  grad_like(*g, L.e[S]);
  SeqView gv = g->view();
  L.io.reshape(dz.B, dz.C, dz.T, 0, Layout::interleaved);
  copy_frames(L.io.view(), dz);
  conv_out_.backward(&gv, L.io.view(), L.e[S].view(), p);
  // Loop invariant: *g holds dL/de[r + 1].
  for (int r = S - 1; r >= -1; --r) {
    const int res = r + 1;
    gv = g->view();
    elu_backward_inplace(gv, L.e[res].view());
    if (res < S)
      for (std::size_t u = stages_[res].units.size(); u-- > 0;)
        stages_[res].units[u].backward(gv, gv, L.acts[res][u], L.scratch, p);
    if (r < 0) break;
    // *g now holds dL/d(output of stage r's down conv).
    grad_like(*other, L.e[r]);
    SeqView ov = other->view();
    stages_[r].down.backward(&ov, g->view(), L.e[r].view(), p);
    std::swap(g, other);
  }
  // *g holds dL/d(conv_in output); the mel input needs no gradient.
  conv_in_.backward(nullptr, g->view(), L.x.view(), p);
}

void Encoder::forward(const Tensor& x, Tensor& z, const ParamSlab& slab, bool train) {
  if (x.C() != cfg_.n_mels)
    throw Error("encoder input has " + std::to_string(x.C()) + " channels, expected n_mels " +
                std::to_string(cfg_.n_mels));
  const int B = x.B(), T = x.T(), Tz = out_frames(T);
  if (Tz < 1) throw Error("encoder input of " + std::to_string(T) + " frames is too short");
  z.resize(B, cfg_.latent_dim, Tz);
  const ParamView p{slab.params(), nullptr, 0};
  const int n_lanes = int(lanes_.size());
  have_train_forward_ = train;
  batch_ = B, frames_ = T;

  // One long item at inference: split its latent frames over the lanes.
  if (!train && B == 1 && n_lanes > 1 && Tz >= 8 * n_lanes) {
    pool_.run([&](int l) {
      const int lo = Tz * l / n_lanes, hi = Tz * (l + 1) / n_lanes;
      int a, b;
      input_range(lo, hi, T, a, b);
      CSeqView xs = x.view();
      xs.data = x.frame(0, a), xs.T = b - a;
      forward_chunk(l, xs, a, lo, hi, z.frame(0, lo), slab);
    });
    return;
  }
  pool_.run([&](int l) {
    Lane& L = lanes_[std::size_t(l)];
    const LaneItems it = lane_items(B, l, n_lanes);
    L.b0 = it.b0, L.nb = it.nb;
    if (L.nb == 0) return;
    forward_lane(L, x.view().items(L.b0, L.nb), z.view().items(L.b0, L.nb), p, train);
  });
}

void Encoder::forward_chunk(int lane, const CSeqView& x, int a, int lo, int hi, float* z, const ParamSlab& slab) {
  assert(x.B == 1 && x.C == cfg_.n_mels && a % cfg_.hop() == 0 && lo >= a / cfg_.hop());
  Lane& L = lanes_[std::size_t(lane)];
  const ParamView p{slab.params(), nullptr, 0};
  L.chunk.resize(1, cfg_.latent_dim, out_frames(x.T));
  assert(hi - a / cfg_.hop() <= L.chunk.T());
  forward_lane(L, x, L.chunk.view(), p, false);
  std::copy_n(L.chunk.frame(0, lo - a / cfg_.hop()), std::size_t(hi - lo) * cfg_.latent_dim, z);
}

void Encoder::backward(const Tensor& dz, ParamSlab& slab) {
  if (!have_train_forward_) throw Error("encoder backward needs a training forward first");
  if (dz.B() != batch_ || dz.C() != cfg_.latent_dim || dz.T() != out_frames(frames_))
    throw Error("encoder backward: gradient shape [" + std::to_string(dz.B()) + ", " + std::to_string(dz.C()) +
                ", " + std::to_string(dz.T()) + "] does not match the last forward");
  try {
    pool_.run([&](int l) {
      Lane& L = lanes_[std::size_t(l)];
      if (L.nb == 0) return;
      backward_lane(L, dz.view().items(L.b0, L.nb), lane_params(slab, range_, l, L.grads));
    });
  } catch (...) {
    clear_lane_grads(lanes_);
    throw;
  }
  reduce_lane_grads(pool_, slab, range_, lanes_);
}

}  // namespace tessera::quant
