// param_slab.h — all trainable parameters in one float buffer, their gradients in another.
// Layers keep offsets (ParamRef) into the slab, never pointers, so the slab may grow while
// modules register; after that one loop serves the optimiser, clipping and checkpoints.
#pragma once
#include <cstddef>
#include <span>
#include <string>
#include <string_view>
#include <vector>

#include "quant/float_buffer.h"

namespace tessera::quant {

// Where one tensor lives in the slab.
struct ParamRef {
  std::size_t offset = 0, size = 0;
};

// A named tensor of the slab, for checkpoints: shape is in the slab's memory order
// (row-major, last index fastest), e.g. a Conv1d weight is {C_out, k, C_in}.
struct ParamEntry {
  std::string name;
  std::vector<int> shape;
  ParamRef ref;
};

// What a layer's forward reads and its backward accumulates into. Gradients of the
// tensor at slab offset o live at grads[o − grad_begin]: the slab's own gradient buffer
// (grad_begin 0) or a worker's private copy of a contiguous range of it.
struct ParamView {
  const float* params = nullptr;
  float* grads = nullptr;
  std::size_t grad_begin = 0;

  const float* p(ParamRef r) const { return params + r.offset; }
  float* g(ParamRef r) const { return grads + (r.offset - grad_begin); }
};

class ParamSlab {
 public:
  // Registers a tensor (zero-initialised); throws tessera::Error on a repeated name or a
  // non-positive dimension. Usage: ParamRef w = slab.add("encoder.conv_in.w", {256, 7, 80});
  ParamRef add(std::string name, std::vector<int> shape);

  std::size_t count() const { return params_.size(); }  // number of scalar parameters
  float* params() { return params_.data(); }
  const float* params() const { return params_.data(); }
  float* grads() { return grads_.data(); }
  const float* grads() const { return grads_.data(); }

  std::span<float> value(ParamRef r) { return {params_.data() + r.offset, r.size}; }
  std::span<const float> value(ParamRef r) const { return {params_.data() + r.offset, r.size}; }
  std::span<float> grad(ParamRef r) { return {grads_.data() + r.offset, r.size}; }
  std::span<const float> grad(ParamRef r) const { return {grads_.data() + r.offset, r.size}; }

  void zero_grad();
  ParamView view() { return {params_.data(), grads_.data(), 0}; }

  // Every tensor in registration order (offsets ascending, contiguous).
  const std::vector<ParamEntry>& entries() const { return entries_; }
  // The entry called `name`, or nullptr.
  const ParamEntry* find(std::string_view name) const;

 private:
  FloatBuffer params_, grads_;
  std::vector<ParamEntry> entries_;
};

}  // namespace tessera::quant
