// chunked_encoder.cpp — the chunk grid, the input window and the per-round parallel encode.
// M mels, D latent dims, N chunk (code frames), h hop, T input frames.
#include "quant/chunked_encoder.h"

#include <algorithm>
#include <cassert>
#include <climits>
#include <string>

#include "audio/error.h"
#include "quant/chunk_window.h"
#include "quant/tokenizer.h"

namespace tessera::quant {
namespace {

// An input length no file reaches: the right edge is still open.
constexpr int kOpen = INT_MAX / 4;

}  // namespace

ChunkedEncoder::Sink ChunkedEncoder::append_to(Eigen::MatrixXi& codes, Eigen::Index& row) {
  return [&codes, &row](const Eigen::Ref<const Eigen::MatrixXi>& c) {
    codes.middleRows(row, c.rows()) = c;
    row += c.rows();
  };
}

ChunkedEncoder::ChunkedEncoder(Tokenizer& tok, int depth, Sink sink, int chunk)
    : tok_(tok),
      depth_(depth),
      N_(chunk),
      hop_(tok.hop()),
      M_(tok.config().model.n_mels),
      lanes_(tok.encoder().lanes()),
      sink_(std::move(sink)) {
  chunk_window::check("encoder", depth, tok.stages(), chunk);
  const int c = 1 + (1 << 16) / N_;
  int a0, b0, a1, b1;
  tok.encoder().input_range(c * N_, (c + 1) * N_, kOpen, a0, b0);
  tok.encoder().input_range((c + lanes_ - 1) * N_, (c + lanes_) * N_, kOpen, a1, b1);
  window_.resize(M_, b1 - a0 + hop_);
  z_.resize(tok.config().model.latent_dim, Eigen::Index(lanes_) * N_);
  codes_.resize(N_, depth_);
}

void ChunkedEncoder::push(const Eigen::Ref<const Eigen::MatrixXf>& frames) {
  if (finished_) throw Error("chunked encoder: push after finish");
  if (frames.rows() != M_)
    throw Error("features have " + std::to_string(frames.rows()) + " mel bands; the model expects " +
                std::to_string(M_));
  const BandStats& st = tok_.stats();
  for (Eigen::Index done = 0; done < frames.cols();) {
    const Eigen::Index n = std::min<Eigen::Index>(frames.cols() - done, window_.cols() - wn_);
    // The normalisation of Tokenizer's features, element by element: (x − mean) / std.
    window_.middleCols(wn_, n) =
        (frames.middleCols(done, n).colwise() - st.mean).array().colwise() / st.std.array();
    wn_ += n, seen_ += n, done += n;
    run_ready(false);
    if (wn_ == window_.cols()) throw Error("chunked encoder: window overflow (internal error)");
  }
}

void ChunkedEncoder::finish() {
  if (finished_) return;
  finished_ = true;
  if (seen_ < hop_) throw Error("audio too short: needs at least " + std::to_string(hop_) + " frames");
  run_ready(true);
}

void ChunkedEncoder::run_ready(bool final) {
  Encoder& enc = tok_.encoder();
  const int T = final ? int(seen_ / hop_ * hop_) : kOpen;
  const int Tz = final ? enc.out_frames(T) : kOpen;
  for (;;) {
    int count = 0;
    while (count < lanes_ && (next_ + count) * N_ < Tz) {
      const int lo = int(next_ + count) * N_, hi = std::min(lo + N_, Tz);
      int a, b;
      enc.input_range(lo, hi, T, a, b);
      if (!final && b > seen_) break;
      ++count;
    }
    // Before the end, wait for a full round: a lone chunk would leave the other lanes
    // idle, and the window has room for the whole round (its size is set for lanes_ chunks).
    if (count == 0 || (!final && count < lanes_)) return;
    tok_.pool().run([&](int l) {
      if (l >= count) return;
      const int lo = int(next_ + l) * N_, hi = std::min(lo + N_, Tz);
      int a, b;
      enc.input_range(lo, hi, T, a, b);
      assert(a >= w0_ && b <= w0_ + wn_);
      const CSeqView x{window_.col(a - w0_).data(), 1, M_, b - a, b - a, 0, 1};
      enc.forward_chunk(l, x, a, lo, hi, z_.col(Eigen::Index(l) * N_).data(), tok_.slab());
    });
    // The codebook search keeps its own scratch: chunk by chunk, in order.
    for (int l = 0; l < count; ++l) {
      const int lo = int(next_ + l) * N_, n = std::min(lo + N_, Tz) - lo;
      tok_.codebooks().encode(z_.middleCols(Eigen::Index(l) * N_, n), depth_, codes_.topRows(n));
      sink_(codes_.topRows(n));
      emitted_ += n;
    }
    next_ += count;
    // Drop the frames no later chunk needs.
    int a, b;
    enc.input_range(int(next_) * N_, int(next_) * N_ + 1, kOpen, a, b);
    chunk_window::slide(window_, w0_, wn_, a);
  }
}

}  // namespace tessera::quant
