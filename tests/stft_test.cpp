// stft_test.cpp — RealFft and Stft against a naive DFT, Parseval, torch/numpy fixtures, COLA round trips.
// F bins, T frames, N = n_fft, L samples.
#include <doctest/doctest.h>

#include <cmath>
#include <complex>
#include <cstdint>
#include <fstream>
#include <numbers>
#include <random>
#include <sstream>
#include <string>
#include <type_traits>
#include <vector>

#include "audio/error.h"
#include "audio/stft.h"

using namespace tessera::audio;

namespace {

// Minimal reader for the fixtures' .npy files: version 1.0, '<f4', C order.
std::vector<float> read_npy(const std::string& name, std::vector<std::size_t>& shape) {
  const std::string path = std::string(TESSERA_FIXTURES) + "/" + name;
  std::ifstream in(path, std::ios::binary);
  REQUIRE_MESSAGE(in.good(), "missing fixture " << path << " (run tests/fixtures/make_stft_fixtures.py)");
  char magic[8];
  in.read(magic, 8);
  REQUIRE(std::string(magic + 1, 5) == "NUMPY");
  std::uint16_t hlen = 0;
  in.read(reinterpret_cast<char*>(&hlen), 2);
  std::string header(hlen, ' ');
  in.read(header.data(), hlen);
  REQUIRE(header.find("'<f4'") != std::string::npos);
  REQUIRE(header.find("'fortran_order': False") != std::string::npos);
  const std::size_t a = header.find('(', header.find("'shape'")), b = header.find(')', a);
  std::stringstream ss(header.substr(a + 1, b - a - 1));
  shape.clear();
  std::size_t total = 1;
  for (std::string tok; std::getline(ss, tok, ',');)
    if (tok.find_first_of("0123456789") != std::string::npos) {
      shape.push_back(std::stoul(tok));
      total *= shape.back();
    }
  std::vector<float> data(total);
  in.read(reinterpret_cast<char*>(data.data()), std::streamsize(total * sizeof(float)));
  REQUIRE(in.good());
  return data;
}

struct Config {
  std::string name;
  int n_fft, win, hop;
  std::size_t length;
};

std::vector<Config> read_configs() {
  std::ifstream in(std::string(TESSERA_FIXTURES) + "/stft_configs.txt");
  REQUIRE(in.good());
  std::vector<Config> out;
  Config c;
  while (in >> c.name >> c.n_fft >> c.win >> c.hop >> c.length) out.push_back(c);
  REQUIRE(out.size() >= 3);
  return out;
}

Eigen::MatrixXcf read_spec(const std::string& name) {  // (T, F, 2) -> F x T
  std::vector<std::size_t> shape;
  const std::vector<float> d = read_npy(name, shape);
  REQUIRE(shape.size() == 3);
  Eigen::MatrixXcf s(static_cast<Eigen::Index>(shape[1]), static_cast<Eigen::Index>(shape[0]));
  for (std::size_t t = 0; t < shape[0]; ++t)
    for (std::size_t k = 0; k < shape[1]; ++k)
      s(Eigen::Index(k), Eigen::Index(t)) = {d[(t * shape[1] + k) * 2], d[(t * shape[1] + k) * 2 + 1]};
  return s;
}

std::vector<float> read_signal(const std::string& name) {
  std::vector<std::size_t> shape;
  std::vector<float> d = read_npy(name, shape);
  REQUIRE(shape.size() == 1);
  return d;
}

double rel_error(const std::vector<float>& a, const std::vector<float>& b) {
  double num = 0.0, den = 0.0;
  for (std::size_t i = 0; i < a.size(); ++i) {
    num += (double(a[i]) - b[i]) * (double(a[i]) - b[i]);
    den += double(b[i]) * b[i];
  }
  return std::sqrt(num / den);
}

std::vector<float> noise(std::size_t n, unsigned seed) {
  std::mt19937 rng(seed);
  std::normal_distribution<float> g(0.0f, 1.0f);
  std::vector<float> x(n);
  for (float& v : x) v = g(rng);
  return x;
}

}  // namespace

// FFT plans are owned RAII resources: movable, never copied.
static_assert(!std::is_copy_constructible_v<RealFft> && std::is_nothrow_move_constructible_v<RealFft>);
static_assert(!std::is_copy_constructible_v<Stft> && std::is_move_constructible_v<Stft>);

TEST_CASE("real fft matches a naive double-precision DFT") {
  // Reference: the DFT definition X[k] = Σ x[n] e^{−2πikn/N}, evaluated in double.
  for (int n : {16, 400, 512}) {
    RealFft fft(n);
    const std::vector<float> x = noise(std::size_t(n), unsigned(n));
    std::vector<std::complex<float>> X(static_cast<std::size_t>(n / 2 + 1));
    fft.forward(x.data(), X.data());
    double max_ref = 0.0, max_err = 0.0;
    for (int k = 0; k <= n / 2; ++k) {
      std::complex<double> ref = 0.0;
      for (int i = 0; i < n; ++i) ref += double(x[std::size_t(i)]) * std::polar(1.0, -2.0 * std::numbers::pi * k * i / n);
      max_ref = std::max(max_ref, std::abs(ref));
      max_err = std::max(max_err, std::abs(ref - std::complex<double>(X[std::size_t(k)])));
    }
    INFO("n = " << n << ", max |error| = " << max_err << ", max |X| = " << max_ref);
    CHECK(max_err <= 1e-6 + 1e-5 * max_ref);

    // Unscaled inverse: inverse(forward(x)) = N·x.
    std::vector<float> back(static_cast<std::size_t>(n));
    fft.inverse(X.data(), back.data());
    for (float& v : back) v /= float(n);
    CHECK(rel_error(back, x) < 1e-6);
  }
}

TEST_CASE("parseval's theorem holds on one frame") {
  // Parseval: N·Σ x² = Σ_{k=0}^{N−1} |X_k|²; for a real frame the half spectrum counts bins
  // 1..N/2−1 twice.
  const int n = 1024;
  RealFft fft(n);
  const std::vector<float> x = noise(std::size_t(n), 3);
  std::vector<std::complex<float>> X(static_cast<std::size_t>(n / 2 + 1));
  fft.forward(x.data(), X.data());
  double time = 0.0, freq = 0.0;
  for (float v : x) time += double(v) * v;
  for (int k = 0; k <= n / 2; ++k) freq += (k == 0 || k == n / 2 ? 1.0 : 2.0) * std::norm(std::complex<double>(X[std::size_t(k)]));
  CHECK(freq / n == doctest::Approx(time).epsilon(1e-5));
}

TEST_CASE("periodic hann window zero-padded and centred") {
  // Periodic Hann (common practice, scipy get_window(fftbins=True)): w[0] = 0, w[W/2] = 1, Σw = W/2.
  Stft s(512, 400, 160);
  const auto& w = s.window();
  REQUIRE(w.size() == 512);
  CHECK(s.window_offset() == 56);
  CHECK(w[55] == 0.0f);
  CHECK(w[56] == 0.0f);
  CHECK(w[56 + 200] == doctest::Approx(1.0).epsilon(1e-7));
  CHECK(w[56 + 399] > 0.0f);
  CHECK(w[56 + 400] == 0.0f);
  double sum = 0.0;
  for (float v : w) sum += v;
  CHECK(sum == doctest::Approx(200.0).epsilon(1e-6));
}

TEST_CASE("stft matches torch.stft (center=True, reflect) on the fixture configs") {
  for (const Config& c : read_configs()) {
    CAPTURE(c.name);
    const std::vector<float> x = read_signal("stft_" + c.name + "_x.npy");
    REQUIRE(x.size() == c.length);
    const Eigen::MatrixXcf ref = read_spec("stft_" + c.name + "_spec.npy");
    Stft stft(c.n_fft, c.win, c.hop);
    const Eigen::MatrixXcf X = stft.forward(x);
    REQUIRE(X.rows() == c.n_fft / 2 + 1);
    REQUIRE(std::size_t(X.cols()) == 1 + c.length / std::size_t(c.hop));  // T = 1 + floor(L/hop)
    REQUIRE(X.rows() == ref.rows());
    REQUIRE(X.cols() == ref.cols());
    const double scale = ref.cwiseAbs().maxCoeff();
    const double err = (X - ref).cwiseAbs().maxCoeff();
    INFO("max |X − torch| = " << err << " of max |X| = " << scale);
    CHECK(err <= 1e-6 + 5e-7 * scale);  // float32 against a float64 reference
  }
}

TEST_CASE("istft matches torch.istft on an inconsistent spectrum") {
  // Zero-phase |X| is not the STFT of any signal, so the window-square normalisation and the
  // trimming of the N/2 padded samples both show in the result.
  for (const Config& c : read_configs()) {
    if (c.name == "short") continue;  // torch refuses padding longer than the signal
    CAPTURE(c.name);
    const Eigen::MatrixXcf ref = read_spec("stft_" + c.name + "_spec.npy");
    const std::vector<float> y_ref = read_signal("stft_" + c.name + "_istft.npy");
    Stft stft(c.n_fft, c.win, c.hop);
    const Eigen::MatrixXcf mag = magnitude(ref).cast<std::complex<float>>();
    const std::vector<float> y = stft.inverse(mag, c.length, IstftEdges::trim);
    REQUIRE(y.size() == y_ref.size());
    double err = 0.0, scale = 0.0;
    for (std::size_t i = 0; i < y.size(); ++i) {
      err = std::max(err, std::abs(double(y[i]) - y_ref[i]));
      scale = std::max(scale, std::abs(double(y_ref[i])));
    }
    INFO("max |y − torch| = " << err << " of " << scale);
    CHECK(err <= 1e-6 + 1e-5 * scale);
  }
}

TEST_CASE("istft inverts the reference spectra and stft round-trips under COLA") {
  // Perfect reconstruction of weighted overlap-add under COLA (Allen 1977); periodic Hann
  // with hop = win/4 and hop = 160 < win/2 both satisfy the NOLA condition needed here.
  for (const Config& c : read_configs()) {
    CAPTURE(c.name);
    const std::vector<float> x = read_signal("stft_" + c.name + "_x.npy");
    Stft stft(c.n_fft, c.win, c.hop);
    if (c.name != "short") {
      CHECK(rel_error(stft.inverse(read_spec("stft_" + c.name + "_spec.npy"), x.size()), x) < 1e-5);
      CHECK(rel_error(stft.inverse(stft.forward(x), x.size(), IstftEdges::trim), x) < 1e-5);
    }
    CHECK(rel_error(stft.inverse(stft.forward(x), x.size(), IstftEdges::fold), x) < 1e-5);
  }
  // A longer noise signal at the reference front end (n_fft 1024, hop 160), L not a multiple of hop.
  Stft stft(1024, 1024, 160);
  const std::vector<float> x = noise(16000 + 77, 11);
  CHECK(rel_error(stft.inverse(stft.forward(x), x.size()), x) < 1e-5);
}

TEST_CASE("reflect padding longer than the signal follows numpy.pad") {
  // numpy.pad(mode='reflect') reflects again and again when the pad exceeds the length.
  const std::vector<float> x = read_signal("stft_short_x.npy");
  const Eigen::MatrixXcf ref = read_spec("stft_short_spec.npy");
  Stft stft(256, 256, 64);
  const Eigen::MatrixXcf X = stft.forward(x);
  REQUIRE(X.cols() == ref.cols());
  CHECK((X - ref).cwiseAbs().maxCoeff() <= 1e-6 + 5e-7 * ref.cwiseAbs().maxCoeff());
}

TEST_CASE("folded istft is the least-squares signal for an inconsistent spectrum") {
  // Griffin & Lim 1984, eq. (6): the signal whose STFT is nearest a given array is the
  // window-weighted overlap-add divided by Σw²; with reflect padding the padded samples belong
  // to the samples they copy. Its residual must not exceed the trimmed inverse's, nor that of
  // small perturbations of it (two-sided spectrum norm).
  Stft stft(256, 256, 64);
  const std::size_t L = 1000;
  Eigen::MatrixXcf Z = stft.forward(noise(L, 5));
  std::mt19937 rng(9);
  std::uniform_real_distribution<float> u(0.0f, 6.2831853f);
  for (Eigen::Index i = 0; i < Z.size(); ++i) Z(i) = std::polar(std::abs(Z(i)), u(rng));
  auto residual = [&](const std::vector<float>& y) {
    const Eigen::MatrixXcf Y = stft.forward(y);
    double r = 0.0;
    for (Eigen::Index t = 0; t < Y.cols(); ++t)
      for (Eigen::Index k = 0; k < Y.rows(); ++k)
        r += (k == 0 || k == Y.rows() - 1 ? 1.0 : 2.0) * std::norm(std::complex<double>(Y(k, t) - Z(k, t)));
    return r;
  };
  const std::vector<float> fold = stft.inverse(Z, L, IstftEdges::fold);
  const std::vector<float> trim = stft.inverse(Z, L, IstftEdges::trim);
  const double r_fold = residual(fold);
  CHECK(r_fold < residual(trim));
  for (std::size_t i : {std::size_t(0), std::size_t(3), std::size_t(100), L - 1}) {
    std::vector<float> p = fold;
    p[i] += 0.05f;
    CHECK(r_fold < residual(p));
  }
}

TEST_CASE("bad settings and empty signals are user errors") {
  CHECK_THROWS_WITH_AS(Stft(511, 400, 160), "n_fft must be even and at least 2, got 511", tessera::Error);
  CHECK_THROWS_WITH_AS(Stft(512, 600, 160), "win_length must be in [1, n_fft=512], got 600", tessera::Error);
  CHECK_THROWS_WITH_AS(Stft(512, 512, 0), "hop_length must be positive, got 0", tessera::Error);
  Stft s(512, 512, 128);
  CHECK_THROWS_WITH_AS(s.forward(std::vector<float>{}), "cannot take the stft of an empty signal", tessera::Error);
}
