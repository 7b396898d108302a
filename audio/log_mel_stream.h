// log_mel_stream.h — log-mel frames of a signal that arrives in blocks, in bounded memory.
// M mels, N = n_fft, h hop (samples), L signal length (known only at finish()).
//
// Frame t is the same frame LogMel::compute gives for the whole signal, bit for bit: its N
// reflect-padded samples (stft.h) are gathered from a sliding buffer of the last samples and
// handed to LogMel::frame. A frame is computed as soon as none of its samples depends on L
// (the right-edge reflection waits for finish()).
//
//   LogMelStream s(cfg, [&](const Eigen::Ref<const Eigen::MatrixXf>& frames) { ... });  // M x n, in order
//   s.push(block, n);  ...  s.finish();   // 1 + L / h frames in all
#pragma once
#include <cstdint>
#include <functional>
#include <vector>

#include <Eigen/Core>

#include "audio/audio_config.h"
#include "audio/log_mel.h"

namespace tessera::audio {

class LogMelStream {
 public:
  using Sink = std::function<void(const Eigen::Ref<const Eigen::MatrixXf>& frames)>;
  // Throws tessera::Error on a bad config.
  LogMelStream(const AudioConfig& cfg, Sink sink);

  void push(const float* samples, std::size_t n);
  // The frames at the right edge. Throws tessera::Error for an empty signal.
  void finish();

  std::int64_t samples_in() const { return seen_; }
  std::int64_t frames_out() const { return next_; }

 private:
  // Computes frames next_.. that are ready (final: L = seen_) and hands them to the sink.
  void run_ready(bool final);

  LogMel lm_;
  Sink sink_;
  int N_, hop_, pad_;
  std::vector<float> buf_;     // samples [b0_, b0_ + bn_), capacity fixed
  std::int64_t b0_ = 0, bn_ = 0, seen_ = 0, next_ = 0;
  std::vector<float> frame_;   // N gathered samples
  Eigen::MatrixXf out_;        // M x capacity / h + 2 frames before they go to the sink
  bool finished_ = false;
};

}  // namespace tessera::audio
