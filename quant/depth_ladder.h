// depth_ladder.h — what each codebook depth keeps of one utterance: the rate (nominal and
// entropy-bound), the decoded log-mel against the true one (feature domain), and the audio
// after Griffin-Lim against the original, beside the oracle (true log-mel → Griffin-Lim,
// the ceiling of the pipeline). M mels, T frames, L code frames, d depth.
#pragma once
#include <functional>
#include <string>
#include <vector>

#include <Eigen/Core>

#include "quant/codebook/usage_stats.h"
#include "quant/tokenizer.h"

namespace tessera::quant {

struct DepthRow {
  int depth = 0;
  double kbps = 0;               // code_rate · depth · log2(K) / 1000
  double entropy_kbps = 0;       // code_rate · Σ_{s<depth} H_s / 1000, H_s empirical entropy of stage s
  double feature_mel_l1 = 0;     // decoded vs true log-mel (natural log)
  double feature_mcd_db = 0;     // decoded vs true log-mel, Kubichek 1993 (see README)
  double mel_l1 = 0;             // synthesised audio vs original
  double mcd_db = 0;
  double spectral_convergence = 0;
};

struct OracleRow {
  double mel_l1 = 0, mcd_db = 0, spectral_convergence = 0;
};

struct Ladder {
  std::vector<DepthRow> depths;
  OracleRow oracle;
  Eigen::MatrixXi codes;                 // L x stages, all stages
  std::vector<StageUsage> stages;        // of this utterance's codes
  // Per stage, the share of code frames that come back unchanged when the full-depth
  // decoded log-mel is encoded again (token stability; chance is 1/K).
  std::vector<double> reencode_agreement;
  std::vector<std::vector<float>> audio; // per row of `depths`, when kept
  std::vector<float> oracle_audio;       // when kept
  double seconds = 0;                    // duration of the input
};

// `samples` at the model's sample rate. `depths` empty means 1..stages. Griffin-Lim uses
// the model's audio settings. `progress(done, total)` counts syntheses.
Ladder depth_ladder(Tokenizer& model, const std::vector<float>& samples, std::vector<int> depths, bool keep_audio,
                    const std::function<void(int, int)>& progress = {});

// Nominal rate: code_rate · depth · log2(K) bit/s, in kbps.
double nominal_kbps(double code_rate, int depth, int codebook_size);

// Entropy-bound rate for a depth from per-stage entropies (bits per code).
double entropy_kbps(const std::vector<StageUsage>& stages, int depth, double code_rate);

}  // namespace tessera::quant
