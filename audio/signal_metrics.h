// signal_metrics.h — distances between a reference and an output, on signals or on log-mel features.
// F bins, M mels, T frames.
//
// Conventions (stated here so every figure tessera prints means one thing):
//  - spectral convergence: SC = ‖ |X| − |Y| ‖_F / ‖ |X| ‖_F, X = STFT(reference), Y = STFT(output).
//  - log-spectral distance (dB): per frame the RMS over the F bins of
//    20·log10(max(|X|, floor) / max(|Y|, floor)), then the mean over frames; floor = cfg.log_floor.
//  - mel cepstral distortion (dB), Kubichek 1993: per frame
//    10/ln 10 · sqrt(2 · Σ_{d=1..13} (c_d − c'_d)²), mean over frames, where c is the
//    orthonormal DCT-II of the frame's natural-log mel magnitudes and c_0 is left out.
//    With fewer than 14 mels the sum runs to d = M − 1.
//  - log-mel L1: the mean over all M·T entries of |a − b| (natural-log mel).
#pragma once
#include <Eigen/Core>
#include <vector>

#include "audio/audio_config.h"

namespace tessera::audio {

// Spectrogram magnitudes (F x T each, equal shapes; tessera::Error otherwise).
double spectral_convergence(const Eigen::MatrixXf& ref_mag, const Eigen::MatrixXf& out_mag);
double log_spectral_distance_db(const Eigen::MatrixXf& ref_mag, const Eigen::MatrixXf& out_mag,
                                double floor);
// Log-mel features (M x T each, equal shapes; tessera::Error otherwise).
double mcd_db(const Eigen::MatrixXf& log_mel_a, const Eigen::MatrixXf& log_mel_b);
double mel_l1(const Eigen::MatrixXf& log_mel_a, const Eigen::MatrixXf& log_mel_b);

struct SignalMetrics {
  double spectral_convergence = 0.0;
  double lsd_db = 0.0;
  double mcd_db = 0.0;
  double mel_l1 = 0.0;
};

// Both signals are cut to their common length, then analysed with cfg's STFT and log-mel.
//   SignalMetrics m = compare_signals(cfg, original, resynthesised);
SignalMetrics compare_signals(const AudioConfig& cfg, const std::vector<float>& reference,
                              const std::vector<float>& output);

}  // namespace tessera::audio
