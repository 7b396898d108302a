// synthetic_speech.h — a test helper that makes speech-like signals and small corpora:
// a glottal-like harmonic source (f0 gliding 90–240 Hz) through vowel formants that move
// every 120–250 ms, noise bursts for fricatives, and short pauses of digital silence.
// Invented data for tests only; deterministic for a given seed.
#pragma once
#include <cmath>
#include <filesystem>
#include <numbers>
#include <random>
#include <string>
#include <vector>

#include "audio/audio_io.h"

namespace tessera::testing {

inline std::vector<float> synthetic_speech(double seconds, int rate, std::uint64_t seed) {
  std::mt19937_64 rng(seed);
  std::uniform_real_distribution<double> u(0, 1);
  // First two formants of a few vowels (Hz), rounded textbook-style values from memory.
  const double formants[][2] = {{730, 1090}, {270, 2290}, {300, 870}, {530, 1840}, {640, 1190}, {440, 1020}};
  const std::size_t n = std::size_t(seconds * rate);
  std::vector<float> x(n, 0.0f);
  std::size_t i = 0;
  double phase = 0, f0 = 90 + 150 * u(rng);
  while (i < n) {
    const double seg = 0.12 + 0.13 * u(rng);
    const std::size_t len = std::min(n - i, std::size_t(seg * rate));
    const double kind = u(rng);
    const auto& fm = formants[std::size_t(u(rng) * 6) % 6];
    const double f0_end = 90 + 150 * u(rng);
    for (std::size_t j = 0; j < len; ++j) {
      const double t = double(j) / double(len);
      double s = 0;
      if (kind < 0.1) {
        s = 0;  // pause: digital silence
      } else if (kind < 0.25) {
        s = 0.15 * (2 * u(rng) - 1);  // fricative-like noise
      } else {
        const double f = f0 + (f0_end - f0) * t;
        phase += 2 * std::numbers::pi * f / rate;
        for (int h = 1; h * f < rate / 2.0 && h <= 40; ++h) {
          const double fh = h * f;
          // Harmonic amplitude: −12 dB/octave source shaped by two resonance peaks.
          const double r1 = 1.0 / (1.0 + std::pow((fh - fm[0]) / 90.0, 2));
          const double r2 = 0.6 / (1.0 + std::pow((fh - fm[1]) / 120.0, 2));
          s += (0.3 / h) * (0.2 + r1 + r2) * std::sin(h * phase);
        }
      }
      const double env = std::sin(std::numbers::pi * t);  // smooth segment edges
      x[i + j] = float(0.5 * s * std::sqrt(env));
    }
    if (kind >= 0.25) f0 = f0_end;
    i += len;
  }
  return x;
}

// Writes `files` synthetic utterances of `seconds` each into `dir` (16-bit WAV).
inline void write_synthetic_corpus(const std::filesystem::path& dir, int files, double seconds, int rate,
                                   std::uint64_t seed) {
  std::filesystem::create_directories(dir);
  for (int f = 0; f < files; ++f) {
    const auto x = synthetic_speech(seconds, rate, seed * 1000 + std::uint64_t(f));
    audio::save_wav((dir / ("utt" + std::to_string(100 + f) + ".wav")).string(), x, rate);
  }
}

}  // namespace tessera::testing
