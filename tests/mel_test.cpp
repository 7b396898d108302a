// mel_test.cpp — mel scales against their published definitions, the filterbank against a
// numpy re-implementation of librosa.filters.mel, and the pseudo-inverse against Penrose's conditions.
// M mels, F bins.
#include <doctest/doctest.h>

#include <Eigen/Dense>
#include <cmath>
#include <fstream>
#include <stdexcept>
#include <string>
#include <vector>

#include "audio/error.h"
#include "audio/log_mel.h"
#include "audio/mel.h"

using namespace tessera::audio;

TEST_CASE("htk mel scale: 1000 Hz is 1000 mel") {
  // O'Shaughnessy 1987 / the HTK Book: mel = 2595·log10(1 + f/700), built so 1 kHz ≈ 1000 mel.
  CHECK(std::abs(hz_to_mel(1000.0, MelScale::htk) - 1000.0) < 0.1);
  CHECK(hz_to_mel(0.0, MelScale::htk) == 0.0);
  // 700 Hz doubles the argument: 2595·log10(2) = 781.17 (hand computation).
  CHECK(hz_to_mel(700.0, MelScale::htk) == doctest::Approx(2595.0 * std::log10(2.0)).epsilon(1e-12));
}

TEST_CASE("slaney mel scale: linear below 1 kHz, logarithmic above") {
  // Slaney, Auditory Toolbox (1998): 200/3 Hz per mel below 1000 Hz, so 1000 Hz = 15 mel and
  // 500 Hz = 7.5 mel; above, 27 mels per factor 6.4, so 6400 Hz = 15 + 27 = 42 mel.
  CHECK(hz_to_mel(1000.0, MelScale::slaney) == doctest::Approx(15.0).epsilon(1e-12));
  CHECK(hz_to_mel(500.0, MelScale::slaney) == doctest::Approx(7.5).epsilon(1e-12));
  CHECK(hz_to_mel(6400.0, MelScale::slaney) == doctest::Approx(42.0).epsilon(1e-12));
  CHECK(hz_to_mel(1000.0 * 6.4 * 6.4, MelScale::slaney) == doctest::Approx(69.0).epsilon(1e-12));
  // Continuous at the break.
  CHECK(hz_to_mel(999.999, MelScale::slaney) == doctest::Approx(15.0).epsilon(1e-6));
  CHECK(mel_to_hz(42.0, MelScale::slaney) == doctest::Approx(6400.0).epsilon(1e-12));
}

TEST_CASE("mel scales round-trip") {
  for (MelScale s : {MelScale::slaney, MelScale::htk})
    for (double f : {0.0, 20.0, 300.0, 999.0, 1000.0, 1001.0, 3400.0, 8000.0, 11025.0}) {
      CAPTURE(f);
      CHECK(mel_to_hz(hz_to_mel(f, s), s) == doctest::Approx(f).epsilon(1e-12).scale(1.0));
    }
}

namespace {
struct Fixture {
  int sr = 0, n_fft = 0, n_mels = 0;
  double f_min = 0, f_max = 0;
  std::string scale;
  int norm = 0;
  std::vector<int> first, count;
  std::vector<std::vector<double>> w;
};

Fixture read_fixture(const std::string& name) {
  const std::string path = std::string(TESSERA_FIXTURES) + "/mel_" + name + ".txt";
  std::ifstream in(path);
  REQUIRE_MESSAGE(in.good(), "missing fixture " << path << " (run tests/fixtures/make_stft_fixtures.py)");
  Fixture f;
  in >> f.sr >> f.n_fft >> f.n_mels >> f.f_min >> f.f_max >> f.scale >> f.norm;
  for (int m = 0; m < f.n_mels; ++m) {
    int a = 0, n = 0;
    in >> a >> n;
    std::vector<double> row(static_cast<std::size_t>(n));
    for (double& v : row) in >> v;
    f.first.push_back(a);
    f.count.push_back(n);
    f.w.push_back(row);
  }
  REQUIRE(in.good());
  return f;
}
}  // namespace

TEST_CASE("filterbank matches librosa's mel formula (numpy fixture)") {
  // Reference: librosa.filters.mel re-implemented in numpy by make_stft_fixtures.py.
  for (const char* name : {"slaney80", "slaney40", "htk24"}) {
    CAPTURE(name);
    const Fixture f = read_fixture(name);
    const MelFilterbank fb(f.sr, f.n_fft, f.n_mels, f.f_min, f.f_max,
                           f.scale == "htk" ? MelScale::htk : MelScale::slaney, f.norm != 0);
    REQUIRE(fb.n_mels() == f.n_mels);
    REQUIRE(fb.n_bins() == f.n_fft / 2 + 1);
    for (int m = 0; m < f.n_mels; ++m) {
      CAPTURE(m);
      REQUIRE(fb.band_size(m) == f.count[std::size_t(m)]);
      CHECK(fb.first_bin(m) == f.first[std::size_t(m)]);
      for (int i = 0; i < fb.band_size(m); ++i) {
        const double ref = f.w[std::size_t(m)][std::size_t(i)];
        CHECK(std::abs(fb.weights(m)[i] - ref) <= 1e-8 + 1e-6 * std::abs(ref));
      }
    }
  }
}

TEST_CASE("filters are non-negative triangles; area-normalised filters have unit area in Hz") {
  // Slaney 1998 / librosa norm='slaney': height 2/(f_hi − f_lo) gives each triangle area 1 in Hz;
  // the sum over bins times the bin spacing approaches it for filters many bins wide.
  AudioConfig cfg;  // reference front end: 16 kHz, n_fft 1024, 80 Slaney mels, 0–8 kHz
  const MelFilterbank fb(cfg);
  const double df = double(cfg.sample_rate) / cfg.n_fft;
  int wide = 0;
  for (int m = 0; m < fb.n_mels(); ++m) {
    CHECK(fb.band_size(m) > 0);
    double area = 0.0;
    for (int i = 0; i < fb.band_size(m); ++i) {
      CHECK(fb.weights(m)[i] >= 0.0f);
      area += fb.weights(m)[i] * df;
    }
    if (fb.band_size(m) >= 16) {
      ++wide;
      CHECK(area == doctest::Approx(1.0).epsilon(0.01));
    }
  }
  CHECK(wide >= 20);
  CHECK((fb.dense().array() >= 0.0f).all());

  // Without normalisation the triangles peak at 1 (and never exceed it).
  const MelFilterbank raw(8000, 256, 24, 300.0, 3400.0, MelScale::htk, false);
  CHECK(raw.dense().maxCoeff() <= 1.0f);
  CHECK(raw.dense().maxCoeff() > 0.9f);
}

TEST_CASE("sparse apply, its transpose and the pseudo-inverse agree with dense algebra") {
  AudioConfig cfg;
  const MelFilterbank fb(cfg);
  const int F = fb.n_bins(), M = fb.n_mels();
  const Eigen::MatrixXf& W = fb.dense();
  REQUIRE(W.rows() == M);
  REQUIRE(W.cols() == F);
  const Eigen::VectorXf a = Eigen::VectorXf::Random(F).cwiseAbs();
  const Eigen::VectorXf v = Eigen::VectorXf::Random(M);
  Eigen::VectorXf out(M), back(F), pv(F), scratch(M);
  fb.apply(a.data(), out.data());
  CHECK((out - W * a).norm() <= 1e-6f * (W * a).norm());
  fb.apply_transpose(v.data(), back.data());
  CHECK((back - W.transpose() * v).norm() <= 1e-6f * (W.transpose() * v).norm());
  fb.apply_pinv(v.data(), pv.data(), scratch.data());
  CHECK((pv - fb.pinv() * v).norm() <= 1e-4f * (fb.pinv() * v).norm());

  // Penrose 1955: A·A⁺·A = A and A⁺·A·A⁺ = A⁺ define the Moore–Penrose inverse.
  const Eigen::MatrixXd Wd = W.cast<double>(), Pd = fb.pinv().cast<double>();
  CHECK((Wd * Pd * Wd - Wd).norm() <= 1e-5 * Wd.norm());
  CHECK((Pd * Wd * Pd - Pd).norm() <= 1e-5 * Pd.norm());
  CHECK(((Wd * Pd).transpose() - Wd * Pd).norm() <= 1e-5 * (Wd * Pd).norm());

  // L = λ_max(MᵀM) = σ_max(M)², checked with an SVD (an independent routine).
  Eigen::JacobiSVD<Eigen::MatrixXd> svd(Wd);
  const double s = svd.singularValues()(0);
  CHECK(fb.lipschitz() == doctest::Approx(s * s).epsilon(1e-9));
}

TEST_CASE("pseudo-inverse of a rank-deficient filterbank (empty bands)") {
  // 40 mels over 33 bins: narrow low bands fall between bins and are empty (librosa warns of
  // the same), so M has zero rows; Penrose's conditions (1955) must still hold.
  const MelFilterbank fb(16000, 64, 40, 0.0, 8000.0, MelScale::slaney, true);
  int empty = 0;
  for (int m = 0; m < fb.n_mels(); ++m) empty += fb.band_size(m) == 0;
  CHECK(empty > 0);
  const Eigen::MatrixXd W = fb.dense().cast<double>(), P = fb.pinv().cast<double>();
  CHECK((W * P * W - W).norm() <= 1e-5 * W.norm());
  CHECK((P * W * P - P).norm() <= 1e-5 * P.norm());
  CHECK(((P * W).transpose() - P * W).norm() <= 1e-5 * (P * W).norm());
  CHECK(((W * P).transpose() - W * P).norm() <= 1e-5 * (W * P).norm());
}

TEST_CASE("log-mel is the log of the floored mel of the stft magnitude") {
  // Definition (DESIGN.md front end): ln(max(M·|X|, floor)), natural log, magnitude not power.
  AudioConfig cfg;
  cfg.n_fft = 512;
  cfg.win_length = 400;
  cfg.n_mels = 40;
  std::vector<float> x(4000);
  for (std::size_t i = 0; i < x.size(); ++i) x[i] = 0.3f * std::sin(0.05f * float(i)) * (i < 2000 ? 1.0f : 0.0f);
  LogMel lm(cfg);
  const Eigen::MatrixXf feats = lm.compute(x);
  Stft stft(cfg);
  const Eigen::MatrixXf mel = lm.filterbank().dense() * magnitude(stft.forward(x));
  REQUIRE(feats.rows() == 40);
  REQUIRE(feats.cols() == Eigen::Index(1 + x.size() / 160));
  const Eigen::MatrixXf ref = mel.array().max(float(cfg.log_floor)).log().matrix();
  // Compared in the linear domain: near the floor the log magnifies float rounding (the
  // sparse and dense products round differently with FMA), so atol + rtol·|ref| on the mel.
  const Eigen::ArrayXXf lin = feats.array().exp(), lin_ref = ref.array().exp();
  CHECK(((lin - lin_ref).abs() <= 1e-6f * lin_ref.maxCoeff() + 1e-4f * lin_ref).all());
  CHECK(feats.minCoeff() == doctest::Approx(std::log(1e-5)).epsilon(1e-6));  // silent half hits the floor
  CHECK((log_mel(cfg, x) - feats).cwiseAbs().maxCoeff() == 0.0f);
}

TEST_CASE("a filterbank built without its inverse has the same filters and refuses pinv") {
  AudioConfig cfg;
  const MelFilterbank full(cfg), lean(cfg, MelFilterbank::Inverse::without);
  CHECK(full.has_inverse());
  CHECK(!lean.has_inverse());
  CHECK((full.dense() - lean.dense()).cwiseAbs().maxCoeff() == 0.0f);
  CHECK_THROWS_AS((void)lean.pinv(), std::logic_error);
  CHECK_THROWS_AS((void)lean.lipschitz(), std::logic_error);
}

TEST_CASE("bad filterbank settings are user errors") {
  CHECK_THROWS_WITH_AS(MelFilterbank(16000, 1024, 80, 0.0, 9000.0, MelScale::slaney, true),
                       "mel band edges must satisfy 0 <= f_min < f_max <= sample_rate/2 = 8000, got f_min 0, f_max 9000",
                       tessera::Error);
  CHECK_THROWS_WITH_AS(MelFilterbank(16000, 1024, 0, 0.0, 8000.0, MelScale::slaney, true),
                       "n_mels must be positive, got 0", tessera::Error);
}
