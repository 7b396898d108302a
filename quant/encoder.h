// encoder.h — log-mel frames to latent frames: Conv1d(M→C, k_in) · per stride s: residual
// units (dilations) · ELU · Conv1d(C→C, k 2s, stride s, pad s/2) · then ELU · Conv1d(C→D, k_out).
// B batch, M mels, C channels, D latent dims, T frames. With the defaults this is
// torch_reference.py's Encoder: [B, 80, T] → [B, 128, T/4].
//
// Threads: a training batch is split by items over the pool's lanes; each lane keeps its
// own activations and (lanes ≥ 1) private gradients, added to the slab in lane order, so
// results are deterministic for a given thread count. An inference call with fewer items
// than lanes splits each item's time axis instead (chunks overlap by the receptive field,
// so the result equals the unsplit one up to float rounding).
#pragma once
#include <random>
#include <string>
#include <vector>

#include "quant/float_buffer.h"
#include "quant/layers/conv1d.h"
#include "quant/layers/residual_unit.h"
#include "quant/model_config.h"
#include "quant/param_slab.h"
#include "quant/tensor.h"
#include "quant/thread_pool.h"

namespace tessera::quant {

class Encoder {
 public:
  // Registers "<name>.conv_in", "<name>.stage<i>.unit<j>.*", "<name>.stage<i>.down",
  // "<name>.conv_out" in the slab (contiguously). Throws tessera::Error on a bad config.
  Encoder(const ModelConfig& cfg, ParamSlab& slab, ThreadPool& pool, const std::string& name = "encoder");

  // PyTorch's default init for every layer, drawn in registration order.
  void init(ParamSlab& slab, std::mt19937_64& rng) const;

  // Latent frames for T input frames: T / hop, rounded down at every stage.
  int out_frames(int T) const;
  // Sizes the training buffers for batches up to B × T by one step on zeros (optional:
  // forward grows them on demand; smaller later calls reuse the capacity).
  void reserve(int B, int T, ParamSlab& slab);

  // x [B, M, T] → z [B, D, out_frames(T)] (z is resized). train keeps what backward needs;
  // without it, activations are shared between layers (long-utterance inference).
  // Usage: enc.forward(mel, z, slab);
  void forward(const Tensor& x, Tensor& z, const ParamSlab& slab, bool train = true);
  // Accumulates the parameter gradients for dz = dL/dz [B, D, T'] of the last training
  // forward into slab.grads(). The input conv needs no input gradient, so none is made.
  void backward(const Tensor& dz, ParamSlab& slab);

  // The slab range holding this encoder's parameters.
  ParamRef params() const { return range_; }

  // Chunked inference on one item (chunked_encoder.h drives it). Lanes are independent
  // buffer sets: different lanes may run at once, one thread each.
  int lanes() const { return int(lanes_.size()); }
  // Input frames [a, b) that latent frames [lo, hi) of a T-frame input depend on (the
  // receptive field, clamped to [0, T)); a is a multiple of the hop.
  void input_range(int lo, int hi, int T, int& a, int& b) const;
  // Latent frames [lo, hi) into z (D floats per frame, hi − lo frames) from x = the input
  // frames [a, b) that input_range(lo, hi, T) names, using lane `lane`'s buffers. The
  // zero padding at a = 0 and b = T is the whole input's, so the frames equal the
  // whole-input forward's up to float rounding, and bit for bit for the same (x, lo, hi).
  void forward_chunk(int lane, const CSeqView& x, int a, int lo, int hi, float* z, const ParamSlab& slab);

 private:
  struct Stage {
    std::vector<ResidualUnit> units;
    Conv1d down;
  };
  // One thread's share of a batch: its activations, backward temporaries and gradients.
  struct Lane {
    int b0 = 0, nb = 0;                                // items [b0, b0 + nb) of the batch
    PaddedTensor x;                                    // [nb, M, T], the input conv's padding
    std::vector<PaddedTensor> y;                       // residual stream per resolution r < S
    std::vector<std::vector<ResidualUnit::Acts>> acts; // per stage and unit
    std::vector<PaddedTensor> e;                       // elu(stream) per resolution r ≤ S
    PaddedTensor ga, gb;                               // backward gradients (ping-pong)
    PaddedTensor io;                                   // output / its gradient, interleaved
    ResidualUnit::Scratch scratch;
    FloatBuffer grads;                                 // private gradients (lanes ≥ 1)
    Tensor chunk;                                      // latent frames of a time chunk
  };

  void forward_lane(Lane& lane, const CSeqView& x, const SeqView& z, const ParamView& p, bool train) const;
  void backward_lane(Lane& lane, const CSeqView& dz, const ParamView& p) const;

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
