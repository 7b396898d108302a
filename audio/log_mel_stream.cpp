// log_mel_stream.cpp — the sliding sample buffer and the frame-readiness rule.
// M mels, N = n_fft, h hop, L signal length.
#include "audio/log_mel_stream.h"

#include <algorithm>
#include <string>

#include "audio/error.h"

namespace tessera::audio {

LogMelStream::LogMelStream(const AudioConfig& cfg, Sink sink)
    : lm_(cfg), sink_(std::move(sink)), N_(cfg.n_fft), hop_(cfg.hop_length), pad_(cfg.n_fft / 2) {
  buf_.resize(4 * std::size_t(N_) + 4 * std::size_t(hop_));
  frame_.resize(std::size_t(N_));
  out_.resize(lm_.filterbank().n_mels(), Eigen::Index(buf_.size()) / hop_ + 2);
}

void LogMelStream::push(const float* samples, std::size_t n) {
  if (finished_) throw Error("log-mel stream: push after finish");
  while (n > 0) {
    const std::size_t room = buf_.size() - std::size_t(bn_);
    if (room == 0) throw Error("log-mel stream: buffer overflow (internal error)");
    const std::size_t k = std::min(room, n);
    std::copy_n(samples, k, buf_.data() + bn_);
    bn_ += std::int64_t(k), seen_ += std::int64_t(k), samples += k, n -= k;
    run_ready(false);
  }
}

void LogMelStream::finish() {
  if (finished_) return;
  finished_ = true;
  if (seen_ == 0) throw Error("cannot compute log-mel features of an empty signal");
  run_ready(true);
}

void LogMelStream::run_ready(bool final) {
  const std::int64_t L = seen_;
  // Before the end, padded sample i = t·h + n maps to x[|i − pad|] whatever L turns out to
  // be, as long as |i − pad| < seen (stft.h: reflect_index); at the end all 1 + L / h frames go.
  auto ready = [&](std::int64_t t) {
    if (final) return t < 1 + L / hop_;
    return t * hop_ - pad_ >= -(L - 1) && t * hop_ + N_ - 1 - pad_ <= L - 1;
  };
  Eigen::Index k = 0;
  for (; ready(next_); ++next_) {
    const std::int64_t j0 = next_ * hop_ - pad_;
    if (j0 >= 0 && j0 + N_ <= L) {
      std::copy_n(buf_.data() + (j0 - b0_), N_, frame_.data());  // no reflection: one copy
    } else {
      for (int n = 0; n < N_; ++n) {
        const std::int64_t idx = std::int64_t(lm_.stft().reflect_index(std::ptrdiff_t(next_ * hop_ + n), std::size_t(L)));
        if (idx < b0_ || idx >= b0_ + bn_) throw Error("log-mel stream: sample dropped too early (internal error)");
        frame_[std::size_t(n)] = buf_[std::size_t(idx - b0_)];
      }
    }
    lm_.frame(frame_.data(), out_.col(k).data());
    if (++k == out_.cols()) {
      sink_(out_);
      k = 0;
    }
  }
  if (k > 0) sink_(out_.leftCols(k));
  // Keep what the next frames can still read: from its first sample, and the last 2N
  // (the right-edge reflection of the final frames reaches back at most N/2).
  const std::int64_t keep_from = std::max<std::int64_t>(b0_, std::min(next_ * hop_ - pad_, seen_ - 2 * std::int64_t(N_)));
  if (keep_from > b0_) {
    const std::int64_t drop = keep_from - b0_;
    std::copy(buf_.begin() + drop, buf_.begin() + bn_, buf_.begin());
    b0_ += drop, bn_ -= drop;
  }
}

}  // namespace tessera::audio
