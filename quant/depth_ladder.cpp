// depth_ladder.cpp — rate and distortion of one utterance at each depth.
#include "quant/depth_ladder.h"

#include <algorithm>
#include <cmath>

#include "audio/error.h"
#include "audio/log_mel.h"
#include "audio/mel_inverse.h"
#include "audio/signal_metrics.h"

namespace tessera::quant {

double nominal_kbps(double code_rate, int depth, int codebook_size) {
  return code_rate * depth * std::log2(double(codebook_size)) / 1000;
}

double entropy_kbps(const std::vector<StageUsage>& stages, int depth, double code_rate) {
  double bits = 0;
  for (int s = 0; s < depth && s < int(stages.size()); ++s) bits += stages[std::size_t(s)].entropy_bits;
  return code_rate * bits / 1000;
}

Ladder depth_ladder(Tokenizer& model, const std::vector<float>& samples, std::vector<int> depths, bool keep_audio,
                    const std::function<void(int, int)>& progress) {
  const ExperimentConfig& cfg = model.config();
  const int S = cfg.codebooks.stages;
  if (depths.empty())
    for (int d = 1; d <= S; ++d) depths.push_back(d);
  for (int d : depths)
    if (d < 1 || d > S) throw Error("depth " + std::to_string(d) + " is outside 1.." + std::to_string(S));
  Ladder lad;
  lad.seconds = double(samples.size()) / cfg.audio.sample_rate;
  const Eigen::MatrixXf mel = audio::log_mel(cfg.audio, samples);
  lad.codes = model.encode(mel, S);
  lad.stages = usage_of_codes(lad.codes, cfg.codebooks.codes);
  // Decoded once at full depth: for the re-encode check and, below, for the full-depth row.
  const Eigen::MatrixXf full = model.decode(lad.codes, S);
  {
    const Eigen::MatrixXi again = model.encode(full, S);
    const Eigen::Index L = std::min(again.rows(), lad.codes.rows());
    for (int s = 0; s < S; ++s)
      lad.reencode_agreement.push_back(
          L ? double((again.col(s).head(L).array() == lad.codes.col(s).head(L).array()).count()) / double(L) : 0.0);
  }
  const int total = int(depths.size()) + 1;
  int done = 0;
  audio::MelInverter inverter(cfg.audio);

  // Oracle: the true log-mel through the same inversion.
  const std::vector<float> oracle = inverter.invert(mel, samples.size());
  const audio::SignalMetrics om = audio::compare_signals(cfg.audio, samples, oracle);
  lad.oracle = {om.mel_l1, om.mcd_db, om.spectral_convergence};
  if (keep_audio) lad.oracle_audio = oracle;
  if (progress) progress(++done, total);

  for (int d : depths) {
    const Eigen::MatrixXf dec = d == S ? full : model.decode(lad.codes, d);
    const Eigen::Index T = std::min(dec.cols(), mel.cols());
    DepthRow r;
    r.depth = d;
    r.kbps = nominal_kbps(cfg.code_rate(), d, cfg.codebooks.codes);
    r.entropy_kbps = entropy_kbps(lad.stages, d, cfg.code_rate());
    r.feature_mel_l1 = audio::mel_l1(mel.leftCols(T), dec.leftCols(T));
    r.feature_mcd_db = audio::mcd_db(mel.leftCols(T), dec.leftCols(T));
    const std::vector<float> y = inverter.invert(dec, 0);
    const audio::SignalMetrics m = audio::compare_signals(cfg.audio, samples, y);
    r.mel_l1 = m.mel_l1, r.mcd_db = m.mcd_db, r.spectral_convergence = m.spectral_convergence;
    lad.depths.push_back(r);
    if (keep_audio) lad.audio.push_back(y);
    if (progress) progress(++done, total);
  }
  return lad;
}

}  // namespace tessera::quant
