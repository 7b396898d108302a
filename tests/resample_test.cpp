// resample_test.cpp — libsoxr conversion keeps in-band tones and removes out-of-band ones.
#include <doctest/doctest.h>

#include <cmath>
#include <complex>
#include <numbers>
#include <vector>

#include "audio/resample.h"

using tessera::audio::resample;

namespace {

std::vector<float> tone(double f, int rate, int n, double amp) {
  std::vector<float> x(n);
  for (int i = 0; i < n; ++i) x[i] = float(amp * std::sin(2 * std::numbers::pi * f * i / rate));
  return x;
}

// Amplitude of frequency f in x (single-bin DFT over a Hann-windowed middle stretch,
// scaled so a sine of amplitude a reads a).
double amplitude_at(const std::vector<float>& x, int rate, double f) {
  const std::size_t lo = x.size() / 4, n = x.size() / 2;
  std::complex<double> acc = 0;
  double wsum = 0;
  for (std::size_t i = 0; i < n; ++i) {
    const double w = 0.5 - 0.5 * std::cos(2 * std::numbers::pi * double(i) / double(n));
    wsum += w;
    acc += w * double(x[lo + i]) * std::polar(1.0, -2 * std::numbers::pi * f * double(lo + i) / rate);
  }
  return 2 * std::abs(acc) / wsum;
}

}  // namespace

TEST_CASE("48 kHz to 16 kHz keeps a 1 kHz tone and removes a 10 kHz tone") {
  const int n = 48000;
  const std::vector<float> in = tone(1000, 48000, n, 0.5);
  const std::vector<float> out = resample(in, 48000, 16000);
  CHECK(out.size() == 16000);
  // Level within ±0.1 dB, and the peak of the spectrum stays at 1 kHz (a bin 5 Hz away reads lower).
  const double a = amplitude_at(out, 16000, 1000);
  CHECK(std::fabs(20 * std::log10(a / 0.5)) < 0.1);
  CHECK(amplitude_at(out, 16000, 1000) > amplitude_at(out, 16000, 1005));
  CHECK(amplitude_at(out, 16000, 1000) > amplitude_at(out, 16000, 995));

  // 10 kHz is above the new Nyquist frequency (8 kHz): it must go, by at least 60 dB.
  const std::vector<float> hi = resample(tone(10000, 48000, n, 0.5), 48000, 16000);
  double rms = 0;
  for (std::size_t i = hi.size() / 4; i < 3 * hi.size() / 4; ++i) rms += double(hi[i]) * hi[i];
  rms = std::sqrt(rms / double(hi.size() / 2));
  const double atten_db = 20 * std::log10((0.5 / std::sqrt(2.0)) / std::max(rms, 1e-12));
  MESSAGE("10 kHz attenuation: " << atten_db << " dB");
  CHECK(atten_db >= 60.0);
}

TEST_CASE("same rate is a copy; bad rates are refused") {
  const std::vector<float> x = tone(100, 8000, 800, 0.3);
  CHECK(resample(x, 8000, 8000) == x);
  CHECK_THROWS(resample(x, 0, 8000));
  CHECK_THROWS(resample(x, 8000, -1));
}
