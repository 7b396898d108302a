// signal_metrics_test.cpp — SC, LSD, MCD and log-mel L1 on worked examples, a scipy fixture and
// signals with a known relation.
// F bins, M mels, T frames.
#include <doctest/doctest.h>

#include <cmath>
#include <fstream>
#include <numbers>
#include <random>
#include <string>
#include <vector>

#include "audio/error.h"
#include "audio/signal_metrics.h"

using namespace tessera::audio;

namespace {
Eigen::MatrixXf mat(int rows, int cols, std::initializer_list<float> row_major) {
  Eigen::MatrixXf m(rows, cols);
  auto it = row_major.begin();
  for (int r = 0; r < rows; ++r)
    for (int c = 0; c < cols; ++c) m(r, c) = *it++;
  return m;
}
const double kDb = 10.0 / std::log(10.0);  // Kubichek 1993 constant, 4.3429 dB per neper
}  // namespace

TEST_CASE("identical inputs have zero distance") {
  std::mt19937 rng(1);
  std::normal_distribution<float> g(-3.0f, 2.0f);
  Eigen::MatrixXf a(80, 7);
  for (Eigen::Index i = 0; i < a.size(); ++i) a(i) = g(rng);
  CHECK(mcd_db(a, a) == 0.0);
  CHECK(mel_l1(a, a) == 0.0);
  const Eigen::MatrixXf mag = a.array().exp().matrix();
  CHECK(spectral_convergence(mag, mag) == 0.0);
  CHECK(log_spectral_distance_db(mag, mag, 1e-5) == 0.0);
}

TEST_CASE("spectral convergence, lsd and log-mel l1: hand-computed examples") {
  // SC by hand: X − Y has entries (0, −1; 4, 0), ‖·‖² = 17; ‖X‖² = 9 + 16 + 1 = 26.
  const Eigen::MatrixXf X = mat(2, 2, {3, 0, 4, 1}), Y = mat(2, 2, {3, 1, 0, 1});
  CHECK(spectral_convergence(X, Y) == doctest::Approx(std::sqrt(17.0 / 26.0)).epsilon(1e-12));  // 0.80861

  // LSD by hand: frame 0 has bin ratios 1/10 and 1, i.e. −20 dB and 0 dB, RMS sqrt(400/2) = 14.142 dB;
  // frame 1 is identical (0 dB); the mean over frames is 7.071 dB.
  const Eigen::MatrixXf A = mat(2, 2, {1, 1, 10, 1}), B = mat(2, 2, {10, 1, 10, 1});
  CHECK(log_spectral_distance_db(A, B, 1e-5) == doctest::Approx(std::sqrt(200.0) / 2.0).epsilon(1e-6));
  // Floor: a silent bin against 1e-3 counts as 20·log10(1e-5 / 1e-3) = −40 dB.
  CHECK(log_spectral_distance_db(mat(1, 1, {0}), mat(1, 1, {1e-3f}), 1e-5) == doctest::Approx(40.0).epsilon(1e-5));

  // L1 by hand: |0−1|, |1−1|, |2−0|, |3−3| -> mean 3/4.
  CHECK(mel_l1(mat(2, 2, {0, 1, 2, 3}), mat(2, 2, {1, 1, 0, 3})) == doctest::Approx(0.75).epsilon(1e-12));
}

TEST_CASE("mcd: worked examples from the orthonormal DCT-II") {
  // A difference equal to δ times the orthonormal DCT-II basis vector d (entries
  // sqrt(2/M)·cos(πd(2n+1)/(2M))) changes c_d by δ alone, so MCD = 10/ln10 · sqrt(2) · |δ|.
  const int M = 20;
  auto basis = [&](int d) {
    Eigen::MatrixXf v(M, 1);
    for (int n = 0; n < M; ++n) v(n) = float(std::sqrt(2.0 / M) * std::cos(std::numbers::pi * d * (2 * n + 1) / (2.0 * M)));
    return v;
  };
  const Eigen::MatrixXf zero = Eigen::MatrixXf::Zero(M, 1);
  CHECK(mcd_db(zero, 0.5f * basis(1)) == doctest::Approx(kDb * std::sqrt(2.0) * 0.5).epsilon(1e-6));  // 3.0709 dB
  CHECK(mcd_db(zero, 0.5f * basis(13)) == doctest::Approx(kDb * std::sqrt(2.0) * 0.5).epsilon(1e-6));
  // c_0 is left out (a level change costs nothing) and only d = 1..13 count.
  CHECK(mcd_db(zero, Eigen::MatrixXf::Constant(M, 1, 2.0f)) == doctest::Approx(0.0).scale(1.0).epsilon(1e-6));
  CHECK(mcd_db(zero, 0.5f * basis(14)) == doctest::Approx(0.0).scale(1.0).epsilon(1e-6));
  // Two components: sqrt(0.3² + 0.4²) = 0.5, the same distortion.
  CHECK(mcd_db(zero, 0.3f * basis(2) + 0.4f * basis(5)) == doctest::Approx(kDb * std::sqrt(2.0) * 0.5).epsilon(1e-6));
  // Mean over frames: frames with 0 and 3.0709 dB average to half.
  Eigen::MatrixXf two(M, 2);
  two << Eigen::MatrixXf::Zero(M, 1), 0.5f * basis(1);
  CHECK(mcd_db(Eigen::MatrixXf::Zero(M, 2), two) == doctest::Approx(kDb * std::sqrt(2.0) * 0.25).epsilon(1e-6));
}

TEST_CASE("mcd and l1 match scipy's dct on random log-mel matrices") {
  // Reference: make_stft_fixtures.py, scipy.fft.dct(type=2, norm='ortho'), c_1..c_13.
  std::ifstream in(std::string(TESSERA_FIXTURES) + "/metrics_example.txt");
  REQUIRE(in.good());
  int M = 0, T = 0;
  in >> M >> T;
  Eigen::MatrixXf a(M, T), b(M, T);
  for (Eigen::MatrixXf* m : {&a, &b})
    for (int r = 0; r < M; ++r)
      for (int c = 0; c < T; ++c) in >> (*m)(r, c);
  double mcd = 0.0, l1 = 0.0;
  in >> mcd >> l1;
  REQUIRE(in.good());
  CHECK(mcd_db(a, b) == doctest::Approx(mcd).epsilon(1e-6));
  CHECK(mel_l1(a, b) == doctest::Approx(l1).epsilon(1e-6));
}

TEST_CASE("compare_signals: a gain of 2 has known distances") {
  // |2X| − |X| = |X|, so SC = 1; every bin is 20·log10 2 = 6.02 dB apart; the log-mel shifts
  // by ln 2 everywhere (L1 = 0.693), a constant that only c_0 sees (MCD = 0).
  AudioConfig cfg;
  std::mt19937 rng(2);
  std::normal_distribution<float> g(0.0f, 0.1f);
  std::vector<float> x(8000), y(8000);
  for (std::size_t i = 0; i < x.size(); ++i) {
    x[i] = g(rng);
    y[i] = 2.0f * x[i];
  }
  const SignalMetrics m = compare_signals(cfg, x, y);
  CHECK(m.spectral_convergence == doctest::Approx(1.0).epsilon(1e-5));
  CHECK(m.lsd_db == doctest::Approx(20.0 * std::log10(2.0)).epsilon(1e-4));
  CHECK(m.mel_l1 == doctest::Approx(std::log(2.0)).epsilon(1e-4));
  CHECK(m.mcd_db == doctest::Approx(0.0).scale(1.0).epsilon(1e-3));

  // Signals are cut to the common length: extra output samples change nothing.
  std::vector<float> longer = x;
  longer.resize(x.size() + 1234, 0.7f);
  const SignalMetrics same = compare_signals(cfg, x, longer);
  CHECK(same.spectral_convergence == 0.0);
  CHECK(same.mcd_db == 0.0);
  CHECK(same.mel_l1 == 0.0);
  CHECK(same.lsd_db == 0.0);
}

TEST_CASE("metrics reject mismatched shapes and empty signals") {
  CHECK_THROWS_WITH_AS(mcd_db(Eigen::MatrixXf::Zero(80, 3), Eigen::MatrixXf::Zero(80, 4)),
                       "mel cepstral distortion: shapes differ, 80 x 3 vs 80 x 4", tessera::Error);
  CHECK_THROWS_AS(compare_signals(AudioConfig{}, {}, {1.0f}), tessera::Error);
}
