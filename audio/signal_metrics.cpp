// signal_metrics.cpp — SC, LSD, MCD and log-mel L1.
// F bins, M mels, T frames, D = cepstral coefficients used (≤ 13).
#include "audio/signal_metrics.h"

#include <algorithm>
#include <cmath>
#include <numbers>
#include <string>

#include "audio/error.h"
#include "audio/log_mel.h"
#include "audio/stft.h"

namespace tessera::audio {

static void check_same(const Eigen::MatrixXf& a, const Eigen::MatrixXf& b, const char* what) {
  if (a.rows() != b.rows() || a.cols() != b.cols())
    throw Error(std::string(what) + ": shapes differ, " + std::to_string(a.rows()) + " x " +
                std::to_string(a.cols()) + " vs " + std::to_string(b.rows()) + " x " + std::to_string(b.cols()));
  if (a.size() == 0) throw Error(std::string(what) + ": empty input");
}

double spectral_convergence(const Eigen::MatrixXf& ref_mag, const Eigen::MatrixXf& out_mag) {
  check_same(ref_mag, out_mag, "spectral convergence");
  const double num = (ref_mag.cast<double>() - out_mag.cast<double>()).norm();
  const double den = ref_mag.cast<double>().norm();
  return den > 0.0 ? num / den : num;
}

double log_spectral_distance_db(const Eigen::MatrixXf& ref_mag, const Eigen::MatrixXf& out_mag, double floor) {
  check_same(ref_mag, out_mag, "log-spectral distance");
  double sum = 0.0;
  for (Eigen::Index t = 0; t < ref_mag.cols(); ++t) {
    double s2 = 0.0;
    for (Eigen::Index k = 0; k < ref_mag.rows(); ++k) {
      const double d = 20.0 * std::log10(std::max(double(ref_mag(k, t)), floor) /
                                         std::max(double(out_mag(k, t)), floor));
      s2 += d * d;
    }
    sum += std::sqrt(s2 / double(ref_mag.rows()));
  }
  return sum / double(ref_mag.cols());
}

double mcd_db(const Eigen::MatrixXf& a, const Eigen::MatrixXf& b) {
  check_same(a, b, "mel cepstral distortion");
  const Eigen::Index M = a.rows(), D = std::min<Eigen::Index>(13, M - 1);
  // Rows 1..D of the orthonormal DCT-II: c_d = sqrt(2/M) Σ_n x_n cos(π d (2n + 1) / (2M)).
  Eigen::MatrixXd dct(D, M);
  for (Eigen::Index d = 1; d <= D; ++d)
    for (Eigen::Index n = 0; n < M; ++n)
      dct(d - 1, n) = std::sqrt(2.0 / double(M)) * std::cos(std::numbers::pi * double(d) * double(2 * n + 1) / double(2 * M));
  const Eigen::MatrixXd dc = dct * (a.cast<double>() - b.cast<double>());  // D x T
  const double k = 10.0 / std::log(10.0);
  double sum = 0.0;
  for (Eigen::Index t = 0; t < dc.cols(); ++t) sum += k * std::sqrt(2.0 * dc.col(t).squaredNorm());
  return sum / double(dc.cols());
}

double mel_l1(const Eigen::MatrixXf& a, const Eigen::MatrixXf& b) {
  check_same(a, b, "log-mel l1");
  return (a.cast<double>() - b.cast<double>()).cwiseAbs().mean();
}

SignalMetrics compare_signals(const AudioConfig& cfg, const std::vector<float>& reference,
                              const std::vector<float>& output) {
  const std::size_t n = std::min(reference.size(), output.size());
  if (n == 0) throw Error("cannot compare empty signals");
  LogMel lm(cfg);
  Eigen::MatrixXcf x, y;
  lm.stft().forward(reference.data(), n, x);
  lm.stft().forward(output.data(), n, y);
  const Eigen::MatrixXf xm = magnitude(x), ym = magnitude(y);
  Eigen::MatrixXf xl, yl;
  lm.from_magnitude(xm, xl);
  lm.from_magnitude(ym, yl);
  SignalMetrics r;
  r.spectral_convergence = spectral_convergence(xm, ym);
  r.lsd_db = log_spectral_distance_db(xm, ym, cfg.log_floor);
  r.mcd_db = mcd_db(xl, yl);
  r.mel_l1 = mel_l1(xl, yl);
  return r;
}

}  // namespace tessera::audio
