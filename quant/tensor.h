// tensor.h — batches of sequences [B, C, T] in one contiguous float buffer, frames contiguous.
// B batch, C channels, T frames.
//
// Memory order is channels-last: element (b, c, t) lives at data[(b·T + t)·C + c]. Each
// frame's C values are contiguous, so one sequence is an Eigen column-major C×T matrix, the
// whole batch a C×(B·T) matrix, and a latent frame is a contiguous D-vector (what a
// codebook search wants). Convolutions read k consecutive frames as one contiguous k·C
// column, which is why this order is the fast one here (see layers/conv1d.h).
#pragma once
#include <Eigen/Core>
#include <algorithm>
#include <cassert>
#include <cstddef>
#include <vector>

namespace tessera::quant {

// A view of B sequences of C channels × T frames: frame t of item b starts at
// data + (b·stride + t)·C. `margin` frames before and after every item are readable
// (a PaddedTensor keeps them zero for convolution padding; gradient buffers may hold
// garbage there). A view never owns memory.
template <class F>
struct SeqViewT {
  F* data = nullptr;
  int B = 0, C = 0, T = 0;
  long stride = 0;  // frames from one item's frame 0 to the next item's frame 0
  int margin = 0;

  F* frame(int b, int t) const { return data + (long(b) * stride + t) * C; }
  operator SeqViewT<const float>() const { return {data, B, C, T, stride, margin}; }
  // Items [b0, b0 + n) only.
  SeqViewT items(int b0, int n) const { return {frame(b0, 0), n, C, T, stride, margin}; }
};
using SeqView = SeqViewT<float>;
using CSeqView = SeqViewT<const float>;

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

  SeqView view() { return {buf_.data(), B_, C_, T_, T_, 0}; }
  CSeqView view() const { return {buf_.data(), B_, C_, T_, T_, 0}; }

 private:
  int B_ = 0, C_ = 0, T_ = 0;
  std::vector<float> buf_;
};

// A batch with `margin` zero frames before, between and after the sequences:
//   [margin | item 0 | margin | item 1 | ... | item B−1 | margin]
// so a convolution reads past either end of a sequence without bounds checks. Margins
// are shared between neighbours (one gap serves as right pad of b and left pad of b+1).
class PaddedTensor {
 public:
  // Sets the layout and zeroes every margin; frame contents are unspecified.
  void reshape(int B, int C, int T, int margin) {
    assert(B >= 0 && C >= 0 && T >= 0 && margin >= 0);
    B_ = B, C_ = C, T_ = T, margin_ = margin;
    buf_.resize((std::size_t(margin) + std::size_t(B) * (T + margin)) * C);
    const std::size_t gap = std::size_t(margin) * C, step = std::size_t(T + margin) * C;
    for (int b = 0; b <= B; ++b) std::fill_n(buf_.data() + b * step, gap, 0.0f);
  }
  // Zeroes everything, margins and frames.
  void zero() { std::fill(buf_.begin(), buf_.end(), 0.0f); }
  // Grows capacity for a later reshape (outside the hot path).
  void reserve(int B, int C, int T, int margin) {
    buf_.reserve((std::size_t(margin) + std::size_t(B) * (T + margin)) * C);
  }

  int B() const { return B_; }
  int C() const { return C_; }
  int T() const { return T_; }
  int margin() const { return margin_; }

  SeqView view() { return {buf_.data() + std::size_t(margin_) * C_, B_, C_, T_, T_ + margin_, margin_}; }
  CSeqView view() const {
    return {buf_.data() + std::size_t(margin_) * C_, B_, C_, T_, T_ + margin_, margin_};
  }

 private:
  int B_ = 0, C_ = 0, T_ = 0, margin_ = 0;
  std::vector<float> buf_;
};

// Copies the frames of every item from src to dst (same B, C, T; margins untouched).
inline void copy_frames(const SeqView& dst, const CSeqView& src) {
  assert(dst.B == src.B && dst.C == src.C && dst.T == src.T);
  for (int b = 0; b < src.B; ++b)
    std::copy_n(src.frame(b, 0), std::size_t(src.T) * src.C, dst.frame(b, 0));
}

// dst += src over the frames of every item.
inline void add_frames(const SeqView& dst, const CSeqView& src) {
  assert(dst.B == src.B && dst.C == src.C && dst.T == src.T);
  const long n = long(src.T) * src.C;
  for (int b = 0; b < src.B; ++b)
    Eigen::Map<Eigen::ArrayXf>(dst.frame(b, 0), n) += Eigen::Map<const Eigen::ArrayXf>(src.frame(b, 0), n);
}

}  // namespace tessera::quant
