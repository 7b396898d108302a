// griffin_lim.h — phase retrieval from an STFT magnitude: plain, fast and mel-consistent Griffin-Lim.
// F bins, M mels, T frames, L samples (T must equal 1 + floor(L / hop), see stft.h).
//
// One iteration n (C₀ = 0, Y₀ = A₀·e^{iφ₀}):
//   Cₙ = STFT(ISTFT(Yₙ₋₁))                        consistency projection (ISTFT with folded edges)
//   Aₙ = fixed target S (plain, fast), or           magnitude
//        max(|Cₙ| + M⁺(mel − M·|Cₙ|), 0)            (mel_consistent: re-impose the mel)
//   Pₙ = Cₙ − α/(1+α)·Cₙ₋₁                          momentum (Perraudin, Balazs & Søndergaard 2013;
//                                                    the same phase as Cₙ + α(Cₙ − Cₙ₋₁); α = 0 is
//                                                    plain GL, Griffin & Lim 1984)
//   Yₙ = Aₙ·Pₙ/|Pₙ|                                 keep the phase
// The output is ISTFT(Y_iters). All buffers are kept in the object: iterations allocate nothing.
#pragma once
#include <Eigen/Core>
#include <complex>
#include <cstdint>
#include <functional>
#include <vector>

#include "audio/audio_config.h"
#include "audio/batch_fft.h"
#include "audio/mel.h"
#include "audio/stft.h"

namespace tessera::audio {

enum class GriffinLimVariant { plain, fast, mel_consistent };
enum class PhaseInit {
  zero,    // φ₀ = 0 (measured best on speech, see mel_inverse.h)
  random,  // φ₀ uniform in [0, 2π) from std::mt19937(seed)
};

// Figures of one iteration, computed only when a callback asks for them.
struct GriffinLimStep {
  int iter = 0;                   // 1-based
  int total = 0;
  // ‖ |Cₙ| − Aₙ ‖ / ‖Aₙ‖ over the two-sided spectrum (bins 1..F−2 counted twice, so the
  // norm is the one in which Griffin-Lim descends). For plain GL it never increases.
  double spectral_distance = 0.0;
  // ‖ M·|Cₙ| − mel ‖_F / ‖mel‖_F (mel_consistent only, else 0).
  double mel_distance = 0.0;
};

struct GriffinLimOptions {
  int iters = 64;
  double momentum = 0.99;  // α for fast and mel_consistent; plain ignores it
  PhaseInit init = PhaseInit::zero;
  std::uint32_t seed = 0;
  std::function<void(const GriffinLimStep&)> on_iteration;  // figures per iteration
  std::function<void(int iter, int total)> progress;        // cheap progress only
};

class GriffinLim {
 public:
  explicit GriffinLim(const AudioConfig& cfg);  // throws tessera::Error on a bad STFT config

  // Fixed target magnitude S (F x T), plain or fast. length 0 means hop·(T − 1).
  //   GriffinLim gl(cfg); auto y = gl.run(S, n, GriffinLimVariant::fast, {});
  std::vector<float> run(const Eigen::MatrixXf& magnitude, std::size_t length,
                         GriffinLimVariant variant, const GriffinLimOptions& opt);
  // Mel-consistent fast GL: linear target mel (M x T), start magnitude A₀ (F x T).
  std::vector<float> run_mel_consistent(const Eigen::MatrixXf& mel, const Eigen::MatrixXf& start,
                                        const MelFilterbank& fb, std::size_t length,
                                        const GriffinLimOptions& opt);

  Stft& stft() { return stft_; }

 private:
  std::vector<float> iterate(const Eigen::MatrixXf& start, const Eigen::MatrixXf* mel,
                             const MelFilterbank* fb, std::size_t length, double momentum,
                             const GriffinLimOptions& opt);
  std::size_t checked_length(Eigen::Index frames, std::size_t length) const;
  void overlap_add(std::size_t frames);  // ISTFT numerator of y_ into ola_

  // The iteration works on batches of W frames in the layout of batch_fft.h (lane j = frame
  // b·W + j), so that the FFTs and every per-bin step run across frames in SIMD lanes.
  Stft stft_;
  BatchRealFft fft_;
  std::vector<float> synth_window_;     // N: window / N (the inverse FFT's 1/N)
  LaneBuffer y_, c_prev_;               // 2F per batch: Yₙ, Cₙ₋₁
  LaneBuffer start_, mel_;              // F, M per batch: A₀ (or the fixed target), target mel
  LaneBuffer frames_, spec_;            // N, 2F: one batch of frames and of Cₙ
  LaneBuffer mag_, target_, corr_;      // F: |Cₙ|, Aₙ, M⁺(mel − M·|Cₙ|)
  LaneBuffer mel_res_, mel_g_;          // M: mel − M·|Cₙ|, (M·Mᵀ)⁺ times it
  std::vector<float> ola_, padded_;     // N + hop·(T−1), L + N
};

// One-shot fixed-magnitude GL (plain or fast) with the config's momentum and zero phase.
std::vector<float> griffin_lim(const AudioConfig& cfg, const Eigen::MatrixXf& magnitude,
                               std::size_t length, GriffinLimVariant variant, int iters,
                               const std::function<void(const GriffinLimStep&)>& on_iteration = {});

}  // namespace tessera::audio
