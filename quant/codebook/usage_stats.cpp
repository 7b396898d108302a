// usage_stats.cpp — code counts per stage and their perplexity and entropy.
// K codes per stage, N vectors.
#include "quant/codebook/usage_stats.h"

#include <cassert>
#include <cmath>
#include <string>

#include "audio/error.h"

namespace tessera::quant {

UsageStats::UsageStats(int stages, int codes)
    : stages_(stages), codes_(codes), counts_(std::size_t(stages) * codes, 0), vectors_(stages, 0) {
  assert(stages >= 0 && codes >= 1);
}

void UsageStats::add(int stage, const int* codes, std::int64_t n) {
  assert(stage >= 0 && stage < stages_);
  std::int64_t* c = counts_.data() + std::size_t(stage) * codes_;
  for (std::int64_t i = 0; i < n; ++i) {  // check all first: a bad matrix leaves no partial counts
    const int k = codes[i];
    if (k < 0 || k >= codes_)
      throw Error("code " + std::to_string(k) + " at stage " + std::to_string(stage) + " is outside 0.." +
                  std::to_string(codes_ - 1));
  }
  for (std::int64_t i = 0; i < n; ++i) ++c[codes[i]];
  vectors_[stage] += n;
}

void UsageStats::add_codes(const Eigen::Ref<const Eigen::MatrixXi>& codes) {
  if (codes.cols() > stages_)
    throw Error("code matrix has " + std::to_string(codes.cols()) + " stages, the statistics hold " +
                std::to_string(stages_));
  for (Eigen::Index s = 0; s < codes.cols(); ++s) add(int(s), codes.col(s).data(), codes.rows());
}

void UsageStats::reset() {
  std::fill(counts_.begin(), counts_.end(), 0);
  std::fill(vectors_.begin(), vectors_.end(), 0);
}

std::span<const std::int64_t> UsageStats::counts(int s) const {
  assert(s >= 0 && s < stages_);
  return {counts_.data() + std::size_t(s) * codes_, std::size_t(codes_)};
}

StageUsage UsageStats::stage(int s) const {
  StageUsage u;
  u.vectors = vectors_[s];
  if (u.vectors == 0) return u;
  double h = 0;  // entropy in nats
  for (std::int64_t c : counts(s)) {
    if (c == 0) continue;
    ++u.used;
    const double p = double(c) / double(u.vectors);
    h -= p * std::log(p);
  }
  u.unused = codes_ - u.used;
  u.perplexity = std::exp(h);
  u.entropy_bits = h / std::log(2.0);
  return u;
}

std::vector<StageUsage> usage_of_codes(const Eigen::Ref<const Eigen::MatrixXi>& codes, int K) {
  UsageStats stats(int(codes.cols()), K);
  stats.add_codes(codes);
  std::vector<StageUsage> out;
  for (int s = 0; s < stats.stages(); ++s) out.push_back(stats.stage(s));
  return out;
}

}  // namespace tessera::quant
