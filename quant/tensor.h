// tensor.h — batches of sequences [B, C, T] in one contiguous float buffer, frames contiguous.
// B batch, C channels, T frames.
//
// A Tensor's memory order is channels-last: element (b, c, t) lives at data[(b·T + t)·C + c].
// Each frame's C values are contiguous, so one sequence is an Eigen column-major C×T
// matrix, the whole batch a C×(B·T) matrix, and a latent frame is a contiguous D-vector
// (what a codebook search wants). Frames-as-columns turn every convolution tap into a GEMM
// over frame views (layers/conv1d.h). Inside the encoder and decoder batches are kept
// interleaved ([T][B][C], see SeqView), where a stride-1 convolution of the whole batch
// is one GEMM per tap.
#pragma once
#include <Eigen/Core>
#include <algorithm>
#include <cassert>
#include <cstddef>
#include <vector>

#include "quant/float_buffer.h"

namespace tessera::quant {

// A view of B sequences of C channels × T frames: frame t of item b starts at
// data + (b·stride + t·tstride)·C. Two orders occur:
//   items       [B][T][C]  tstride 1, stride ≥ T (a Tensor, or items with gaps between)
//   interleaved [T][B][C]  tstride B, stride 1   (all items' frame t side by side)
// `margin` frames before and after every item are readable (a PaddedTensor keeps them
// zero for convolution padding; gradient buffers may hold garbage there). A view never
// owns memory.
template <class F>
struct SeqViewT {
  F* data = nullptr;
  int B = 0, C = 0, T = 0;
  long stride = 0;  // frames from item b's frame 0 to item b+1's frame 0
  int margin = 0;
  long tstride = 1;  // frames from frame t to frame t+1 of one item

  F* frame(int b, int t) const { return data + (long(b) * stride + long(t) * tstride) * C; }
  bool interleaved() const { return B > 1 && stride == 1 && tstride == B; }
  operator SeqViewT<const float>() const { return {data, B, C, T, stride, margin, tstride}; }
  // Items [b0, b0 + n) only.
  SeqViewT items(int b0, int n) const { return {frame(b0, 0), n, C, T, stride, margin, tstride}; }
};
using SeqView = SeqViewT<float>;
using CSeqView = SeqViewT<const float>;

// Calls f(n, p0, p1, ...) over runs of n contiguous floats covering the frames of every
// view, the runs matched across views (all views have the same B, C, T): one run per
// batch if all are interleaved, one per item if all have contiguous items, else per frame.
template <class Fn, class V0, class... V>
void for_each_run(Fn&& f, const V0& v0, const V&... v) {
  const bool items = v0.tstride == 1 && ((v.tstride == 1) && ...);
  const bool inter = v0.interleaved() && (v.interleaved() && ...);
  const std::size_t C = std::size_t(v0.C);
  if (items) {
    for (int b = 0; b < v0.B; ++b) f(std::size_t(v0.T) * C, v0.frame(b, 0), v.frame(b, 0)...);
  } else if (inter) {
    f(std::size_t(v0.B) * v0.T * C, v0.frame(0, 0), v.frame(0, 0)...);
  } else {
    for (int b = 0; b < v0.B; ++b)
      for (int t = 0; t < v0.T; ++t) f(C, v0.frame(b, t), v.frame(b, t)...);
  }
}

// An owning batch [B, C, T] without margins. resize() keeps capacity, so a tensor reused
// at the same or a smaller shape never reallocates.
class Tensor {
 public:
  Tensor() = default;
  Tensor(int B, int C, int T) { resize(B, C, T); }

  // Sets the shape; contents are unspecified (kept where the size did not grow).
  void resize(int B, int C, int T) {
    assert(B >= 0 && C >= 0 && T >= 0);
    B_ = B, C_ = C, T_ = T;
    buf_.resize(std::size_t(B) * C * T);
  }
  void zero() { std::fill(buf_.begin(), buf_.end(), 0.0f); }

  int B() const { return B_; }
  int C() const { return C_; }
  int T() const { return T_; }
  std::size_t size() const { return buf_.size(); }
  float* data() { return buf_.data(); }
  const float* data() const { return buf_.data(); }

  float& at(int b, int c, int t) { return buf_[(std::size_t(b) * T_ + t) * C_ + c]; }
  float at(int b, int c, int t) const { return buf_[(std::size_t(b) * T_ + t) * C_ + c]; }
  float* frame(int b, int t) { return buf_.data() + (std::size_t(b) * T_ + t) * C_; }
  const float* frame(int b, int t) const { return buf_.data() + (std::size_t(b) * T_ + t) * C_; }

  // Item b as a C×T column-major matrix; the whole batch as C×(B·T).
  Eigen::Map<Eigen::MatrixXf> mat(int b) { return {frame(b, 0), C_, T_}; }
  Eigen::Map<const Eigen::MatrixXf> mat(int b) const { return {frame(b, 0), C_, T_}; }
  Eigen::Map<Eigen::MatrixXf> all() { return {buf_.data(), C_, long(B_) * T_}; }
  Eigen::Map<const Eigen::MatrixXf> all() const { return {buf_.data(), C_, long(B_) * T_}; }

  SeqView view() { return {buf_.data(), B_, C_, T_, T_, 0, 1}; }
  CSeqView view() const { return {buf_.data(), B_, C_, T_, T_, 0, 1}; }

 private:
  int B_ = 0, C_ = 0, T_ = 0;
  FloatBuffer buf_;
};

enum class Layout {
  items,        // [margin | item 0 | margin | item 1 | ... | item B−1 | margin], frames of an item contiguous
  interleaved,  // [margin·B | frame 0 of items 0..B−1 | frame 1 ... | margin·B]
};

// A batch with zero margins so a convolution reads past either end of a sequence
// without bounds checks. In the items layout the gaps are shared by neighbours (one gap
// is the right pad of b and the left pad of b+1); interleaved, the margins are the
// margin·B frames before the first and after the last time step.
class PaddedTensor {
 public:
  // Sets the layout and zeroes every margin; frame contents are unspecified.
  void reshape(int B, int C, int T, int margin, Layout layout = Layout::items) {
    assert(B >= 0 && C >= 0 && T >= 0 && margin >= 0);
    B_ = B, C_ = C, T_ = T, margin_ = margin, layout_ = layout;
    const std::size_t gap = std::size_t(margin) * C;
    if (layout == Layout::items) {
      buf_.resize((std::size_t(margin) + std::size_t(B) * (T + margin)) * C);
      const std::size_t step = std::size_t(T + margin) * C;
      for (int b = 0; b <= B; ++b) std::fill_n(buf_.data() + b * step, gap, 0.0f);
    } else {
      buf_.resize(std::size_t(B) * (T + 2 * std::size_t(margin)) * C);
      std::fill_n(buf_.data(), gap * B, 0.0f);
      std::fill_n(buf_.data() + (std::size_t(margin) + T) * B * C, gap * B, 0.0f);
    }
  }
  // The same shape and layout as `like`.
  void reshape_like(const PaddedTensor& like) { reshape(like.B_, like.C_, like.T_, like.margin_, like.layout_); }
  // Zeroes everything, margins and frames.
  void zero() { std::fill(buf_.begin(), buf_.end(), 0.0f); }

  int B() const { return B_; }
  int C() const { return C_; }
  int T() const { return T_; }
  int margin() const { return margin_; }
  Layout layout() const { return layout_; }

  SeqView view() { return make_view(buf_.data()); }
  CSeqView view() const { return make_view(buf_.data()); }

 private:
  template <class F>
  SeqViewT<F> make_view(F* base) const {
    if (layout_ == Layout::items)
      return {base + std::size_t(margin_) * C_, B_, C_, T_, T_ + margin_, margin_, 1};
    return {base + std::size_t(margin_) * B_ * C_, B_, C_, T_, 1, margin_, B_};
  }

  int B_ = 0, C_ = 0, T_ = 0, margin_ = 0;
  Layout layout_ = Layout::items;
  FloatBuffer buf_;
};

// The layout a buffer should take to match view v.
template <class F>
Layout layout_of(const SeqViewT<F>& v) {
  return v.interleaved() ? Layout::interleaved : Layout::items;
}

// Copies the frames of every item from src to dst (same B, C, T; margins untouched).
inline void copy_frames(const SeqView& dst, const CSeqView& src) {
  assert(dst.B == src.B && dst.C == src.C && dst.T == src.T);
  for_each_run([](std::size_t n, float* d, const float* s) { std::copy_n(s, n, d); }, dst, src);
}

// dst += src over the frames of every item.
inline void add_frames(const SeqView& dst, const CSeqView& src) {
  assert(dst.B == src.B && dst.C == src.C && dst.T == src.T);
  for_each_run(
      [](std::size_t n, float* d, const float* s) {
        Eigen::Map<Eigen::ArrayXf>(d, long(n)) += Eigen::Map<const Eigen::ArrayXf>(s, long(n));
      },
      dst, src);
}

}  // namespace tessera::quant
