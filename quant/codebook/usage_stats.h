// usage_stats.h — how evenly each stage uses its codes: counts, perplexity, entropy.
// K codes per stage, N vectors. A code matrix is N x depth (int, column-major): column s holds
// the stage-s code of every vector, the layout ResidualCodebooks::encode writes.
#pragma once
#include <Eigen/Core>
#include <cstdint>
#include <span>
#include <vector>

namespace tessera::quant {

// Summary of one stage over the vectors counted so far. With p_k = count_k / vectors:
//   entropy_bits = −Σ_k p_k·log2 p_k                     (empirical entropy, bits per code)
//   perplexity   = exp(−Σ_k p_k·ln p_k) = 2^entropy_bits  (the number of equally used codes
//                  with the same entropy: K for uniform use, 1 for a single code)
// With no vectors counted, all fields are 0.
struct StageUsage {
  std::int64_t vectors = 0;  // vectors counted
  int used = 0;              // codes that occurred at least once
  int unused = 0;            // K − used: codes dead over the counted window
  double perplexity = 0;
  double entropy_bits = 0;
};

// Per-stage code counts, accumulated until reset().
//   UsageStats u(8, 1024);
//   u.add_codes(codes);               // codes: N x depth
//   double ppl = u.stage(0).perplexity;
class UsageStats {
 public:
  UsageStats() = default;
  UsageStats(int stages, int codes);

  int stages() const { return stages_; }
  int codes() const { return codes_; }

  // Counts n codes of one stage. Throws tessera::Error naming the value if a code is outside 0..K-1.
  void add(int stage, const int* codes, std::int64_t n);
  // Counts a code matrix (N x depth, depth <= stages); column s goes to stage s.
  void add_codes(const Eigen::Ref<const Eigen::MatrixXi>& codes);
  void reset();

  StageUsage stage(int s) const;
  std::span<const std::int64_t> counts(int s) const;  // K counts of stage s
  // Every count (stages x K) and every stage's vector total, for saving and restoring the
  // statistics with a training checkpoint.
  std::span<std::int64_t> all_counts() { return counts_; }
  std::span<std::int64_t> all_vectors() { return vectors_; }

 private:
  int stages_ = 0, codes_ = 0;
  std::vector<std::int64_t> counts_;  // stages x K
  std::vector<std::int64_t> vectors_;  // per stage
};

// Usage of every column of a code matrix (N x depth) with K codes per stage.
std::vector<StageUsage> usage_of_codes(const Eigen::Ref<const Eigen::MatrixXi>& codes, int K);

}  // namespace tessera::quant
