// codebook_config.h — the typed settings of the residual codebooks, with documented defaults.
// Defaults are the reference model of DESIGN.md (8 stages × 1024 codes × 128 dims, β = 0.25,
// EMA decay 0.99). Loading from YAML and range checks of user input belong to the config
// loader; ResidualCodebooks re-checks the values it cannot work with. No dependencies.
#pragma once
#include <cstdint>

namespace tessera::quant {

struct CodebookConfig {
  // How the codebooks learn (van den Oord et al. 2017, "Neural Discrete Representation
  // Learning": codebook loss, or its EMA alternative in their appendix).
  enum class Learning {
    ema,   // exponential moving averages of cluster sizes and sums, Laplace-smoothed
    loss,  // gradient of the codebook loss ‖sg(r_s) − c‖² into codebook_grads(), stepped elsewhere
  };
  // How the training depth (number of stages used) is drawn per batch ("stage dropout").
  enum class DepthSchedule {
    uniform,          // depth uniform over 1..stages
    full_or_uniform,  // full depth with probability p_full, else uniform over 1..stages
  };

  int stages = 8;             // N residual stages
  int codes = 1024;           // K codes per stage (10 bits each)
  int dim = 128;              // D dims of a latent vector (= encoder output channels)
  double commitment = 0.25;   // β of the commitment loss β·Σ_s mean‖r_s − sg(q_s)‖²
  Learning learning = Learning::ema;
  double ema_decay = 0.99;    // γ in cluster_size ← γ·cluster_size + (1 − γ)·count
  double ema_epsilon = 1e-5;  // Laplace smoothing ε of the cluster sizes

  // k-means++ initialisation (Arthur & Vassilvitskii 2007) from the first batches.
  int kmeans_init_batches = 8;      // batches the trainer collects before init_from()
  int kmeans_init_vectors = 16384;  // at most this many vectors per stage (random subsample)
  // Lloyd iterations after seeding (stops early on convergence). Measured cost at 16384 x 128
  // with K = 1024: ~0.13 s CPU per iteration (SSE2 build), ~0.04 s with TESSERA_NATIVE.
  int kmeans_iters = 20;

  // Dead-code restart: a code unused for this many consecutive training steps of its stage
  // takes a random recent residual of that stage (common practice; the value is ours).
  int dead_after_steps = 100;       // M; 0 disables restarts
  int restart_pool = 1024;          // recent residuals kept per stage (ring buffer)
  int restart_pool_per_step = 64;   // residuals sampled into the ring per stage and step

  DepthSchedule schedule = DepthSchedule::full_or_uniform;
  // With full_or_uniform the full depth is drawn with probability p_full + (1 − p_full)/N:
  // 0.5625 at N = 8, so the deepest stages train on more than half of the batches.
  double p_full = 0.5;

  int threads = 0;          // worker threads of the nearest-code search; 0 = all hardware threads
  std::uint64_t seed = 0;   // seeds the codebooks' own generator (restarts, subsampling, k-means)
};

constexpr const char* to_string(CodebookConfig::Learning l) {
  return l == CodebookConfig::Learning::ema ? "ema" : "loss";
}
constexpr const char* to_string(CodebookConfig::DepthSchedule s) {
  return s == CodebookConfig::DepthSchedule::uniform ? "uniform" : "full_or_uniform";
}

}  // namespace tessera::quant
