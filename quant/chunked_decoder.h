// chunked_decoder.h — codes in, log-mel frames out, in bounded memory: the mirror of
// chunked_encoder.h. The decoder runs over a fixed grid of chunks of N code frames, each
// from the latent frames of its receptive field (Decoder::input_range), so the output
// depends only on the codes and N. Tokenizer::decode goes through it.
// M mels, D latent dims, d depth, N chunk (code frames), h hop (output frames per code frame).
//
//   ChunkedDecoder dec(tok, depth, [&](const Eigen::Ref<const Eigen::MatrixXf>& mel) {
//     /* mel: the next M x n log-mel frames (natural log, unnormalised), in order */ });
//   dec.push(codes);    // rows: code frames, >= depth columns; any number of rows, repeatedly
//   dec.finish();       // the last chunks; throws tessera::Error if no code frame arrived
#pragma once
#include <cstdint>
#include <functional>

#include <Eigen/Core>

namespace tessera::quant {

class Tokenizer;

class ChunkedDecoder {
 public:
  using Sink = std::function<void(const Eigen::Ref<const Eigen::MatrixXf>& log_mel)>;
  static constexpr int kDefaultChunk = 256;

  // Throws tessera::Error for depth outside 1..stages or chunk < 1. `tok` must outlive this.
  ChunkedDecoder(Tokenizer& tok, int depth, Sink sink, int chunk = kDefaultChunk);

  // Throws tessera::Error for fewer than depth columns or a code outside 0..K−1.
  void push(const Eigen::Ref<const Eigen::MatrixXi>& codes);
  void finish();

  std::int64_t code_frames_in() const { return seen_; }

 private:
  void run_ready(bool final);

  Tokenizer& tok_;
  int depth_, N_, hop_, M_, lanes_;
  Sink sink_;
  Eigen::MatrixXf window_;   // D x capacity: latent frames [w0_, w0_ + wn_)
  std::int64_t w0_ = 0, wn_ = 0, seen_ = 0;
  std::int64_t next_ = 0;    // first chunk not yet decoded
  Eigen::MatrixXf y_;        // M x (lanes·N·h): one round's output frames
  bool finished_ = false;
};

}  // namespace tessera::quant
