// chunked_decoder.cpp — the chunk grid, the latent window and the per-round parallel decode.
// M mels, D latent dims, N chunk (code frames), h hop, L code frames.
#include "quant/chunked_decoder.h"

#include <algorithm>
#include <cassert>
#include <climits>
#include <string>

#include "audio/error.h"
#include "quant/chunk_window.h"
#include "quant/tokenizer.h"

namespace tessera::quant {
namespace {

constexpr int kOpen = INT_MAX / 64;  // a length no input reaches: the right edge is still open

}  // namespace

ChunkedDecoder::ChunkedDecoder(Tokenizer& tok, int depth, Sink sink, int chunk)
    : tok_(tok),
      depth_(depth),
      N_(chunk),
      hop_(tok.hop()),
      M_(tok.config().model.n_mels),
      lanes_(tok.decoder().lanes()),
      sink_(std::move(sink)) {
  chunk_window::check("decoder", depth, tok.stages(), chunk);
  const int c = 1 + (1 << 16) / N_;
  int a0, b0, a1, b1;
  tok.decoder().input_range(c * N_ * hop_, (c + 1) * N_ * hop_, kOpen, a0, b0);
  tok.decoder().input_range((c + lanes_ - 1) * N_ * hop_, (c + lanes_) * N_ * hop_, kOpen, a1, b1);
  window_.resize(tok.config().model.latent_dim, b1 - a0 + 1);
  y_.resize(M_, Eigen::Index(lanes_) * N_ * hop_);
}

void ChunkedDecoder::push(const Eigen::Ref<const Eigen::MatrixXi>& codes) {
  if (finished_) throw Error("chunked decoder: push after finish");
  const int K = tok_.config().codebooks.codes;
  if (codes.cols() < depth_)
    throw Error("codes have " + std::to_string(codes.cols()) + " stages; depth " + std::to_string(depth_) +
                " needs that many");
  if (codes.rows() == 0) return;
  const auto used = codes.leftCols(depth_);
  if (used.minCoeff() < 0 || used.maxCoeff() >= K)
    throw Error("codes outside 0.." + std::to_string(K - 1) + " (the model's codebook size is " + std::to_string(K) + ")");
  for (Eigen::Index done = 0; done < codes.rows();) {
    const Eigen::Index n = std::min<Eigen::Index>(codes.rows() - done, window_.cols() - wn_);
    tok_.codebooks().decode(codes.middleRows(done, n), depth_, window_.middleCols(wn_, n));
    wn_ += n, seen_ += n, done += n;
    run_ready(false);
    if (wn_ == window_.cols()) throw Error("chunked decoder: window overflow (internal error)");
  }
}

void ChunkedDecoder::finish() {
  if (finished_) return;
  finished_ = true;
  if (seen_ < 1) throw Error("no code frames to decode");
  run_ready(true);
}

void ChunkedDecoder::run_ready(bool final) {
  Decoder& dec = tok_.decoder();
  const int L = final ? int(seen_) : kOpen;
  const BandStats& st = tok_.stats();
  for (;;) {
    int count = 0;
    while (count < lanes_ && (next_ + count) * N_ < L) {
      const int lo = int(next_ + count) * N_, hi = std::min(lo + N_, L);
      int a, b;
      dec.input_range(lo * hop_, hi * hop_, L, a, b);
      if (!final && b > seen_) break;
      ++count;
    }
    // Before the end, wait for a full round: a lone chunk would leave the other lanes
    // idle, and the window has room for the whole round (its size is set for lanes_ chunks).
    if (count == 0 || (!final && count < lanes_)) return;
    tok_.pool().run([&](int l) {
      if (l >= count) return;
      const int lo = int(next_ + l) * N_, hi = std::min(lo + N_, L);
      int a, b;
      dec.input_range(lo * hop_, hi * hop_, L, a, b);
      assert(a >= w0_ && b <= w0_ + wn_);
      const CSeqView x{window_.col(a - w0_).data(), 1, int(window_.rows()), b - a, b - a, 0, 1};
      dec.forward_chunk(l, x, a, lo, hi, y_.col(Eigen::Index(l) * N_ * hop_).data(), tok_.slab());
    });
    for (int l = 0; l < count; ++l) {
      const int lo = int(next_ + l) * N_, n = (std::min(lo + N_, L) - lo) * hop_;
      auto y = y_.middleCols(Eigen::Index(l) * N_ * hop_, n);
      y = (y.array().colwise() * st.std.array()).colwise() + st.mean.array();
      sink_(y);
    }
    next_ += count;
    int a, b;
    dec.input_range(int(next_ * N_) * hop_, int(next_ * N_ + 1) * hop_, kOpen, a, b);
    chunk_window::slide(window_, w0_, wn_, a);
  }
}

}  // namespace tessera::quant
