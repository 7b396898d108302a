// chunked_encoder.h — log-mel frames in, codes out, in bounded memory.
// M mels, D latent dims, d depth, N chunk (code frames), h hop (input frames per code frame).
//
// The encoder runs over a fixed grid of chunks — chunk c holds code frames [c·N, (c+1)·N) —
// each computed from the input frames of its receptive field (Encoder::input_range), so
// zero padding appears only at the true start and end. The codebook search runs chunk by
// chunk too. A chunk's codes therefore depend only on the frames and on N: not on how
// the frames arrive, on the input's length or on the thread count. Tokenizer::encode goes
// through this class, so a file streamed block by block and the whole file in memory give
// the same codes bit for bit.
//
//   ChunkedEncoder enc(tok, depth, [&](const Eigen::Ref<const Eigen::MatrixXi>& codes) {
//     /* codes: the next rows (code frames) x depth, in order */ });
//   enc.push(frames);   // M x n natural-log log-mel (unnormalised), any n, repeatedly
//   enc.finish();       // the last chunks; throws tessera::Error if shorter than h frames
//
// Memory: a window of window_frames() input frames (the chunks of one parallel round plus
// the context on both sides) and one chunk's activations per thread lane; the cost does not
// grow with the input's length. Lane l of the tokenizer's pool runs chunk l of a round.
#pragma once
#include <cstdint>
#include <functional>

#include <Eigen/Core>

namespace tessera::quant {

class Tokenizer;

class ChunkedEncoder {
 public:
  using Sink = std::function<void(const Eigen::Ref<const Eigen::MatrixXi>& codes)>;
  // Code frames per chunk unless told otherwise: 256 (10 s at 25 frames/s), so that a
  // minute of speech gives every lane of a 2-core machine work (6 chunks, 3 full rounds).
  // The context on each side is ~14 code frames; measured at 1 thread (60 s, reference
  // architecture): 256 costs ~5 % more than 1024, 128 ~17 %; at 2 threads 256 runs 1.7x
  // the 1-thread rate where 1024 ran 1.0x (bench_tokenize).
  static constexpr int kDefaultChunk = 256;

  // A sink writing into codes from row `row` on (codes has room for all; row counts up).
  static Sink append_to(Eigen::MatrixXi& codes, Eigen::Index& row);

  // Throws tessera::Error for depth outside 1..stages or chunk < 1. `tok` must outlive this.
  ChunkedEncoder(Tokenizer& tok, int depth, Sink sink, int chunk = kDefaultChunk);

  void push(const Eigen::Ref<const Eigen::MatrixXf>& frames);
  // Encodes the rest. Throws tessera::Error when fewer than h frames arrived in all.
  void finish();

  std::int64_t frames_in() const { return seen_; }
  std::int64_t code_frames_out() const { return emitted_; }
  int window_frames() const { return int(window_.cols()); }

 private:
  // Runs rounds of up to `lanes` chunks while their inputs are all present (final: the
  // input is complete and has T frames).
  void run_ready(bool final);

  Tokenizer& tok_;
  int depth_, N_, hop_, M_, lanes_;
  Sink sink_;
  Eigen::MatrixXf window_;     // M x capacity: normalised input frames [w0_, w0_ + wn_)
  std::int64_t w0_ = 0, wn_ = 0, seen_ = 0, emitted_ = 0;
  std::int64_t next_ = 0;      // first chunk not yet encoded
  Eigen::MatrixXf z_;          // D x (lanes·N): one round's latent frames
  Eigen::MatrixXi codes_;      // N x depth
  bool finished_ = false;
};

}  // namespace tessera::quant
