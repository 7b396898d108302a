// batch_fft_test.cpp — BatchRealFft against a naive double DFT and KissFFT; batch layout transposes; Stft on partial batches.
// W lanes, N = n (FFT size), F bins (N/2 + 1), T frames.
#include <doctest/doctest.h>

#include <cmath>
#include <complex>
#include <numbers>
#include <random>
#include <string>
#include <type_traits>
#include <vector>

#include "audio/batch_fft.h"
#include "audio/error.h"
#include "audio/stft.h"

using namespace tessera::audio;

namespace {

constexpr int W = BatchRealFft::lanes;

// Lane j of row i: uniform noise in [−1, 1], a different stream per (n, lane).
LaneBuffer noise_batch(int rows, unsigned seed) {
  std::mt19937 rng(seed);
  std::uniform_real_distribution<float> u(-1.0f, 1.0f);
  LaneBuffer x(static_cast<std::size_t>(rows));
  for (int j = 0; j < W; ++j)
    for (int i = 0; i < rows; ++i) x[std::size_t(i)][j] = u(rng);
  return x;
}

std::vector<float> lane(const LaneBuffer& b, int j) {
  std::vector<float> v(b.size());
  for (std::size_t i = 0; i < b.size(); ++i) v[i] = b[i][j];
  return v;
}

double l2(const std::vector<float>& v) {
  double s = 0.0;
  for (float x : v) s += double(x) * x;
  return std::sqrt(s);
}

// Definition X[k] = Σ_i x[i]·e^{−2πiki/N}, in double, k = 0..N/2.
std::vector<std::complex<double>> naive_rfft(const std::vector<float>& x) {
  const std::size_t n = x.size();
  std::vector<std::complex<double>> w(n), X(n / 2 + 1);
  for (std::size_t r = 0; r < n; ++r) w[r] = std::polar(1.0, -2.0 * std::numbers::pi * double(r) / double(n));
  for (std::size_t k = 0; k <= n / 2; ++k) {
    std::complex<double> acc = 0.0;
    for (std::size_t i = 0; i < n; ++i) acc += double(x[i]) * w[(k * i) % n];
    X[k] = acc;
  }
  return X;
}

// N·irfft by definition, with numpy's rule that Im X[0] and Im X[N/2] are ignored:
// y[i] = Re X[0] + (−1)^i·Re X[N/2] + 2·Σ_{k=1}^{N/2−1} Re(X[k]·e^{2πiki/N}).
std::vector<double> naive_irfft(const std::vector<std::complex<double>>& X, std::size_t n) {
  std::vector<std::complex<double>> w(n);
  for (std::size_t r = 0; r < n; ++r) w[r] = std::polar(1.0, 2.0 * std::numbers::pi * double(r) / double(n));
  std::vector<double> y(n);
  for (std::size_t i = 0; i < n; ++i) {
    double acc = X[0].real() + (i % 2 ? -1.0 : 1.0) * X[n / 2].real();
    for (std::size_t k = 1; k < n / 2; ++k) acc += 2.0 * (X[k] * w[(k * i) % n]).real();
    y[i] = acc;
  }
  return y;
}

std::complex<float> bin(const LaneBuffer& X, int k, int j) { return {X[2 * std::size_t(k)][j], X[2 * std::size_t(k) + 1][j]}; }

}  // namespace

static_assert(!std::is_copy_constructible_v<BatchRealFft> && std::is_nothrow_move_constructible_v<BatchRealFft>);

TEST_CASE("batch real fft matches a naive double-precision DFT in every lane") {
  // Reference: the DFT definition, evaluated in double. Float FFT error grows like
  // eps·sqrt(log N)·‖x‖ per bin (common practice), far below the bound 1e-5·‖x‖₂.
  for (int n : {16, 64, 512, 1024, 2048, 400}) {
    BatchRealFft fft(n);
    CHECK(fft.vectorised() == (n != 400));  // 400 is not a power of two: KissFFT per lane
    const LaneBuffer x = noise_batch(n, unsigned(n));
    LaneBuffer X(2 * std::size_t(fft.n_bins()));
    fft.forward(x.data(), X.data());
    double worst = 0.0;
    for (int j = 0; j < W; ++j) {
      const std::vector<float> xj = lane(x, j);
      const std::vector<std::complex<double>> ref = naive_rfft(xj);
      double err = 0.0;
      for (int k = 0; k < fft.n_bins(); ++k)
        err = std::max(err, std::abs(ref[std::size_t(k)] - std::complex<double>(bin(X, k, j))));
      worst = std::max(worst, err / l2(xj));
    }
    INFO("n = " << n << ", max |X − DFT| / ‖x‖₂ = " << worst);
    CHECK(worst < 1e-5);
  }
}

TEST_CASE("batch inverse is N·irfft and ignores the imaginary parts of DC and Nyquist") {
  // Reference: the inverse DFT of the Hermitian extension, in double (numpy.fft.irfft's
  // documented treatment of the DC and Nyquist imaginary parts).
  for (int n : {16, 64, 1024, 400}) {
    BatchRealFft fft(n);
    const int F = fft.n_bins();
    const LaneBuffer X = noise_batch(2 * F, unsigned(7 * n));  // imaginary DC / Nyquist are non-zero
    LaneBuffer y(static_cast<std::size_t>(n));
    fft.inverse(X.data(), y.data());
    double worst = 0.0;
    for (int j = 0; j < W; ++j) {
      std::vector<std::complex<double>> Xj(static_cast<std::size_t>(F));
      double norm2 = 0.0;
      for (int k = 0; k < F; ++k) {
        Xj[std::size_t(k)] = std::complex<double>(bin(X, k, j));
        norm2 += std::norm(Xj[std::size_t(k)]);
      }
      const std::vector<double> ref = naive_irfft(Xj, std::size_t(n));
      double err = 0.0;
      for (int i = 0; i < n; ++i) err = std::max(err, std::abs(ref[std::size_t(i)] - double(y[std::size_t(i)][j])));
      worst = std::max(worst, err / std::sqrt(norm2));
    }
    INFO("n = " << n << ", max |y − N·irfft| / ‖X‖₂ = " << worst);
    CHECK(worst < 1e-5);
  }
}

TEST_CASE("batch fft agrees with KissFFT (RealFft) on the same frames, both ways") {
  for (int n : {16, 256, 1024, 2048}) {
    BatchRealFft batch(n);
    RealFft kiss(n);
    const int F = batch.n_bins();
    const LaneBuffer x = noise_batch(n, unsigned(3 * n + 1));
    LaneBuffer X(2 * std::size_t(F)), y(static_cast<std::size_t>(n));
    batch.forward(x.data(), X.data());
    batch.inverse(X.data(), y.data());
    std::vector<std::complex<float>> K(static_cast<std::size_t>(F));
    std::vector<float> back(static_cast<std::size_t>(n));
    double worst_fwd = 0.0, worst_inv = 0.0, worst_round = 0.0;
    for (int j = 0; j < W; ++j) {
      const std::vector<float> xj = lane(x, j);
      kiss.forward(xj.data(), K.data());
      kiss.inverse(K.data(), back.data());
      const double norm = l2(xj);
      for (int k = 0; k < F; ++k) worst_fwd = std::max(worst_fwd, double(std::abs(K[std::size_t(k)] - bin(X, k, j))) / norm);
      for (int i = 0; i < n; ++i) {
        // Both inverses are unscaled: inverse(forward(x)) = N·x (KissFFT's documented convention).
        worst_inv = std::max(worst_inv, std::abs(double(back[std::size_t(i)]) - y[std::size_t(i)][j]) / (n * norm));
        worst_round = std::max(worst_round, std::abs(double(y[std::size_t(i)][j]) / n - xj[std::size_t(i)]) / norm);
      }
    }
    INFO("n = " << n << ": forward " << worst_fwd << ", inverse " << worst_inv << ", round trip " << worst_round);
    CHECK(worst_fwd < 1e-5);
    CHECK(worst_inv < 1e-5);
    CHECK(worst_round < 1e-6);
  }
}

TEST_CASE("frames move in and out of the batch layout, partial batches included") {
  // Reference: the definitions in batch_fft.h, written as plain loops.
  const int n = 64, first = 5, last = 61;
  std::vector<float> window(static_cast<std::size_t>(n));
  for (int i = 0; i < n; ++i) window[std::size_t(i)] = (i >= first && i < last) ? 0.5f + 0.01f * float(i) : 0.0f;
  for (std::size_t hop : {std::size_t(3), std::size_t(20)}) {  // hop 3 < W: frames overlap inside one block
    for (int count : {W, W - 1, 1}) {
      std::vector<float> src(std::size_t(W) * hop + std::size_t(n));
      for (std::size_t i = 0; i < src.size(); ++i) src[i] = std::sin(0.37f * float(i)) + 0.01f * float(i);
      LaneBuffer frames(static_cast<std::size_t>(n));
      gather_frames(src.data(), hop, count, window.data(), first, last, n, frames.data());
      std::vector<float> ola(src.size(), 0.25f), ref(src.size(), 0.25f);
      overlap_add_frames(frames.data(), window.data(), first, last, hop, count, ola.data());
      int bad = 0;
      for (int i = 0; i < n; ++i)
        for (int j = 0; j < W; ++j) {
          const float want = (j < count && i >= first && i < last) ? src[std::size_t(j) * hop + std::size_t(i)] * window[std::size_t(i)] : 0.0f;
          bad += frames[std::size_t(i)][j] != want;
          if (j < count && i >= first && i < last) ref[std::size_t(j) * hop + std::size_t(i)] += want * window[std::size_t(i)];
        }
      int off = 0;  // only the order of the additions differs: float rounding
      for (std::size_t i = 0; i < ola.size(); ++i) off += std::abs(ola[i] - ref[i]) > 1e-6f + 1e-6f * std::abs(ref[i]);
      INFO("hop " << hop << ", count " << count);
      CHECK(bad == 0);
      CHECK(off == 0);

      // Bins: columns of stride F + 3 (a sub-block of a larger matrix) through the layout and back.
      const int F = 37;
      const std::size_t stride = F + 3;
      const LaneBuffer X = noise_batch(2 * F, unsigned(count));
      std::vector<std::complex<float>> cols(stride * std::size_t(W), {9.0f, 9.0f});
      bins_to_columns(X.data(), F, count, cols.data(), stride);
      LaneBuffer back(2 * std::size_t(F));
      columns_to_bins(cols.data(), stride, F, count, back.data());
      int bad_bins = 0;
      for (int j = 0; j < W; ++j)
        for (int k = 0; k < int(stride); ++k) {
          const std::complex<float> c = cols[std::size_t(j) * stride + std::size_t(k)];
          const bool inside = j < count && k < F;
          bad_bins += inside ? c != bin(X, k, j) : c != std::complex<float>(9.0f, 9.0f);  // nothing else written
          if (k < F) bad_bins += bin(back, k, j) != (j < count ? bin(X, k, j) : std::complex<float>(0.0f, 0.0f));
        }
      CHECK(bad_bins == 0);
    }
  }
}

TEST_CASE("batched stft and istft equal the frame-by-frame KissFFT path on a partial last batch") {
  // Reference: Stft::analyze_frame / synthesize_frame (one RealFft per frame), same definitions.
  for (int n_fft : {512, 400}) {
    Stft stft(n_fft, n_fft == 512 ? 400 : 320, 160);
    const std::size_t L = 160 * std::size_t(3 * W + 2) + 37;  // T = 3W + 3: not a multiple of W
    std::vector<float> x(L);
    std::mt19937 rng(5);
    std::normal_distribution<float> g(0.0f, 0.3f);
    for (float& v : x) v = g(rng);
    const Eigen::MatrixXcf X = stft.forward(x);
    REQUIRE(std::size_t(X.cols()) == stft.n_frames(L));
    REQUIRE(X.cols() % W != 0);
    std::vector<float> padded;
    stft.reflect_pad(x.data(), L, padded);
    std::vector<std::complex<float>> ref(std::size_t(stft.n_bins()));
    double err = 0.0, norm = 0.0;
    for (Eigen::Index t = 0; t < X.cols(); ++t) {
      stft.analyze_frame(padded.data() + std::size_t(t) * 160, ref.data());
      for (int k = 0; k < stft.n_bins(); ++k) {
        err = std::max(err, double(std::abs(ref[std::size_t(k)] - X(k, t))));
        norm = std::max(norm, double(std::abs(ref[std::size_t(k)])));
      }
    }
    INFO("n_fft " << n_fft << ": max |batched − per frame| = " << err << ", max |X| = " << norm);
    CHECK(err <= 1e-6 + 1e-5 * norm);

    // Inverse: overlap-add of synthesize_frame, frame by frame.
    std::vector<float> ola;
    stft.overlap_add(X, ola);
    std::vector<float> ref_ola(ola.size(), 0.0f), frame(static_cast<std::size_t>(n_fft));
    for (Eigen::Index t = 0; t < X.cols(); ++t) {
      stft.synthesize_frame(X.col(t).data(), frame.data());
      for (int i = stft.window_offset(); i < stft.window_offset() + stft.win_length(); ++i)
        ref_ola[std::size_t(t) * 160 + std::size_t(i)] += frame[std::size_t(i)];
    }
    double e2 = 0.0, r2 = 0.0;
    for (std::size_t i = 0; i < ola.size(); ++i) {
      e2 += double(ola[i] - ref_ola[i]) * (ola[i] - ref_ola[i]);
      r2 += double(ref_ola[i]) * ref_ola[i];
    }
    INFO("overlap-add relative L2 difference " << std::sqrt(e2 / r2));
    CHECK(std::sqrt(e2 / r2) < 1e-6);
  }
}

TEST_CASE("batch fft sizes are checked") {
  for (int n : {0, 1, 7, -16}) {
    try {
      BatchRealFft fft(n);
      FAIL("no error for n = " << n);
    } catch (const tessera::Error& e) {
      CHECK(std::string(e.what()) == "fft size must be even and at least 2, got " + std::to_string(n));
    }
  }
}
