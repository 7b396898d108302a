// decoder.h — latent frames back to log-mel frames, the mirror of the encoder:
// Conv1d(D→C, k_in) · per stride s (reversed): ELU · ConvTranspose1d(C→C, k 2s, stride s,
// pad s/2) · residual units (dilations) · then ELU · Conv1d(C→M, decoder_kernel_out).
// B batch, M mels, C channels, D latent dims, L latent frames, T = L·hop output frames.
// With the defaults this is torch_reference.py's Decoder: [B, 128, L] → [B, 80, 4L].
// Threads as in encoder.h: items over lanes for batches, time chunks for one long item.
#pragma once
#include <random>
#include <string>
#include <vector>

#include "quant/float_buffer.h"
#include "quant/layers/conv1d.h"
#include "quant/layers/conv_transpose1d.h"
#include "quant/layers/residual_unit.h"
#include "quant/model_config.h"
#include "quant/param_slab.h"
#include "quant/tensor.h"
#include "quant/thread_pool.h"

namespace tessera::quant {

class Decoder {
 public:
  // Registers "<name>.conv_in", "<name>.stage<i>.up", "<name>.stage<i>.unit<j>.*",
  // "<name>.conv_out" in the slab (contiguously). Throws tessera::Error on a bad config.
  Decoder(const ModelConfig& cfg, ParamSlab& slab, ThreadPool& pool, const std::string& name = "decoder");

  void init(ParamSlab& slab, std::mt19937_64& rng) const;
  // Output frames for L latent frames: L·hop.
  int out_frames(int L) const;
  // Sizes the training buffers for batches up to B × L by one step on zeros (optional).
  void reserve(int B, int L, ParamSlab& slab);

  // zq [B, D, L] → y [B, M, out_frames(L)] (y is resized). train keeps what backward needs.
  void forward(const Tensor& zq, Tensor& y, const ParamSlab& slab, bool train = true);
  // For dy = dL/dy of the last training forward: accumulates parameter gradients into
  // slab.grads() and sets dzq [B, D, L] (resized) to dL/dzq, the gradient the
  // straight-through estimator passes on to the encoder.
  void backward(const Tensor& dy, Tensor& dzq, ParamSlab& slab);

  ParamRef params() const { return range_; }

  // Chunked inference on one item (chunked_decoder.h drives it); lanes as in encoder.h.
  int lanes() const { return int(lanes_.size()); }
  // Latent frames [a, b) that output frames [lo, hi) of an L-frame input depend on (the
  // receptive field, clamped to [0, L)).
  void input_range(int lo, int hi, int L, int& a, int& b) const;
  // Output frames [lo·hop, hi·hop) into y (M floats per frame) from x = the latent frames
  // [a, b) that input_range(lo·hop, hi·hop, L) names, using lane `lane`'s buffers; bit for
  // bit the same for the same (x, lo, hi).
  void forward_chunk(int lane, const CSeqView& x, int a, int lo, int hi, float* y, const ParamSlab& slab);

 private:
  struct Stage {
    ConvTranspose1d up;
    std::vector<ResidualUnit> units;
  };
  struct Lane {
    int b0 = 0, nb = 0;
    PaddedTensor x;                                    // [nb, D, L], the input conv's padding
    std::vector<PaddedTensor> y;                       // residual stream per resolution r ≥ 1
    std::vector<std::vector<ResidualUnit::Acts>> acts; // per stage and unit
    std::vector<PaddedTensor> e;                       // elu(stream) per resolution r ≤ S
    PaddedTensor ga, gb, gx;                           // backward gradients
    PaddedTensor io;                                   // output / its gradient, interleaved
    ResidualUnit::Scratch scratch;
    FloatBuffer grads;                                 // private gradients (lanes ≥ 1)
    Tensor chunk;                                      // output frames of a time chunk
  };

  void forward_lane(Lane& lane, const CSeqView& x, const SeqView& y, const ParamView& p, bool train) const;
  void backward_lane(Lane& lane, const CSeqView& dy, const SeqView& dzq, const ParamView& p) const;

  ModelConfig cfg_;
  ThreadPool& pool_;
  Conv1d conv_in_;
  std::vector<Stage> stages_;
  Conv1d conv_out_;
  ParamRef range_;
  std::vector<Lane> lanes_;
  bool have_train_forward_ = false;
  int batch_ = 0, frames_ = 0;
};

}  // namespace tessera::quant
