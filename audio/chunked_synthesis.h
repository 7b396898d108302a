// chunked_synthesis.h — log-mel → audio for outputs of any length, in bounded memory.
// M mels, T frames, h hop (samples), C chunk (frames), V overlap (frames), F fade (samples).
//
// The log-mel is cut into chunks of C frames; each is inverted on its own (MelInverter:
// the model's mel inversion and Griffin-Lim) together with V frames of context on each side,
// and neighbouring chunks are cross-faded linearly over F samples centred on their border
// (kept ≥ V·h − F/2 samples away from a chunk's edge, where its reflect padding shows).
// Up to T < C + V this is exactly invert_log_mel(cfg, log_mel, 0). Longer outputs are not the
// whole-signal Griffin-Lim: phase is not carried across a border, so a border can dip where
// the two chunks' phases disagree (one fade per C·h samples, 20 s by default).
//
//   ChunkedSynthesis syn(cfg, [&](const float* x, std::size_t n) { writer.write(x, n); });
//   syn.push(log_mel_frames); ...; syn.finish();     // h·(T − 1) samples in all
#pragma once
#include <cstdint>
#include <functional>
#include <vector>

#include <Eigen/Core>

#include "audio/audio_config.h"
#include "audio/mel_inverse.h"

namespace tessera::audio {

class ChunkedSynthesis {
 public:
  using Sink = std::function<void(const float* samples, std::size_t n)>;
  static constexpr int kDefaultChunk = 2000;   // frames (20 s at hop 160, 16 kHz)
  static constexpr int kDefaultOverlap = 32;   // frames of context on each side
  // Throws tessera::Error on a bad config, chunk < 1, or an overlap too short for the fade.
  ChunkedSynthesis(const AudioConfig& cfg, Sink sink, int chunk = kDefaultChunk, int overlap = kDefaultOverlap);

  void push(const Eigen::Ref<const Eigen::MatrixXf>& log_mel);
  // Throws tessera::Error if no frame arrived.
  void finish();
  // Chunks inverted so far (for progress).
  std::int64_t chunks_done() const { return next_; }

 private:
  void run(std::int64_t k, bool final);  // inverts chunk k and emits its samples

  MelInverter inv_;
  Sink sink_;
  int C_, V_, hop_, F_;
  Eigen::MatrixXf window_;     // M x (C + 2V): frames [w0_, w0_ + wn_)
  std::int64_t w0_ = 0, wn_ = 0, seen_ = 0, next_ = 0;
  std::vector<float> tail_;    // the previous chunk's samples over the next fade
  std::vector<float> fade_;    // F blended samples
  bool finished_ = false;
};

}  // namespace tessera::audio
