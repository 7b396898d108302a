// chunked_synthesis.cpp — chunk schedule, per-chunk inversion and the cross-fades.
// T frames, h hop, C chunk, V overlap, F fade, L = h·(T − 1) samples, B_k = (k + 1)·C·h.
#include "audio/chunked_synthesis.h"

#include <algorithm>
#include <cstdint>
#include <string>

#include "audio/error.h"

namespace tessera::audio {

ChunkedSynthesis::ChunkedSynthesis(const AudioConfig& cfg, Sink sink, int chunk, int overlap)
    : inv_(cfg), sink_(std::move(sink)), C_(chunk), V_(overlap), hop_(cfg.hop_length), F_(8 * cfg.hop_length) {
  if (chunk < 1) throw Error("synthesis chunk must be at least 1 frame, got " + std::to_string(chunk));
  // The fade must stay clear of a chunk's edges (half a window of reflect padding).
  if ((overlap - 1) * hop_ - F_ / 2 < cfg.n_fft / 2)
    throw Error("synthesis overlap of " + std::to_string(overlap) + " frames is too short for n_fft " +
                std::to_string(cfg.n_fft) + " and hop " + std::to_string(hop_));
  window_.resize(cfg.n_mels, C_ + 2 * V_);
  tail_.resize(std::size_t(F_));
  fade_.resize(std::size_t(F_));
}

void ChunkedSynthesis::push(const Eigen::Ref<const Eigen::MatrixXf>& log_mel) {
  if (finished_) throw Error("chunked synthesis: push after finish");
  if (log_mel.rows() != window_.rows())
    throw Error("log-mel has " + std::to_string(log_mel.rows()) + " bands, expected " + std::to_string(window_.rows()));
  for (Eigen::Index done = 0; done < log_mel.cols();) {
    const Eigen::Index n = std::min<Eigen::Index>(log_mel.cols() - done, window_.cols() - wn_);
    window_.middleCols(wn_, n) = log_mel.middleCols(done, n);
    wn_ += n, seen_ += n, done += n;
    // Chunk k can go once its right context is in: then a chunk k + 1 exists too.
    while (seen_ >= (next_ + 1) * C_ + V_) run(next_, false);
  }
}

void ChunkedSynthesis::finish() {
  if (finished_) return;
  finished_ = true;
  if (seen_ < 1) throw Error("no log-mel frames to synthesize");
  // Every chunk but the last has its full right context (T ≥ (k + 1)·C + V); the last takes
  // the rest, under C + V frames.
  const std::int64_t chunks = seen_ < V_ ? 1 : (seen_ - V_) / C_ + 1;
  while (next_ < chunks) run(next_, next_ + 1 == chunks);
}

void ChunkedSynthesis::run(std::int64_t k, bool last) {
  const std::int64_t f0 = std::max<std::int64_t>(0, k * C_ - V_), f1 = std::min(seen_, (k + 1) * C_ + V_);
  const std::int64_t L = last ? hop_ * (seen_ - 1) : INT64_MAX;
  const Eigen::MatrixXf mel = window_.middleCols(Eigen::Index(f0 - w0_), Eigen::Index(f1 - f0));
  const std::vector<float> y = inv_.invert(mel, 0);  // y[i] is sample f0·h + i
  auto at = [&](std::int64_t s) { return y[std::size_t(s - f0 * hop_)]; };
  std::int64_t s = 0;
  if (k > 0) {
    // Fade from the previous chunk's tail into this chunk around B_{k−1}.
    const std::int64_t b = k * C_ * hop_ - F_ / 2, e = std::min(b + F_, L);
    for (std::int64_t j = 0; j < e - b; ++j) {
      const float w = (float(j) + 0.5f) / float(F_);
      fade_[std::size_t(j)] = tail_[std::size_t(j)] * (1.0f - w) + at(b + j) * w;
    }
    if (e > b) sink_(fade_.data(), std::size_t(e - b));
    s = b + F_;
  }
  const std::int64_t end = last ? L : (k + 1) * C_ * hop_ - F_ / 2;
  if (end > s) sink_(y.data() + (s - f0 * hop_), std::size_t(end - s));
  if (!last)
    for (int j = 0; j < F_; ++j) tail_[std::size_t(j)] = at(end + j);
  next_ = k + 1;
  // Drop the frames before the next chunk's left context.
  const std::int64_t drop = std::min(wn_, std::max<std::int64_t>(0, next_ * C_ - V_) - w0_);
  if (drop > 0) {
    for (Eigen::Index t = 0; t < Eigen::Index(wn_ - drop); ++t) window_.col(t) = window_.col(t + Eigen::Index(drop));
    w0_ += drop, wn_ -= drop;
  }
}

}  // namespace tessera::audio
