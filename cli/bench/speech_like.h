// speech_like.h — a deterministic speech-like test signal for benchmarks, made in pieces so
// an hour of it never has to sit in memory: syllables of voiced sound (glottal pulses
// through three formant resonators, 4 per second, formants and pitch gliding), fricative
// noise bursts and pauses. Invented data: timing input only, never a quality reference.
#pragma once
#include <cstddef>
#include <random>
#include <vector>

namespace tessera::bench {

class SpeechLike {
 public:
  SpeechLike(int sample_rate, unsigned seed);
  // The next n samples (unscaled: peaks of a few tenths to a few units).
  void fill(float* out, std::size_t n);

 private:
  int sr_;
  std::mt19937 rng_;
  std::uniform_real_distribution<double> u_{0.0, 1.0};
  std::normal_distribution<double> g_{0.0, 1.0};
  double y1_[3] = {0, 0, 0}, y2_[3] = {0, 0, 0}, phase_ = 0;
  std::size_t i_ = 0;
  int vowel_ = 0, next_ = 1;
  bool fricative_ = false, pause_ = false;
};

// `seconds` of SpeechLike(seed), peak-normalised to 0.5.
std::vector<float> speech_like(int sample_rate, double seconds, unsigned seed);

// Writes `seconds` of SpeechLike(seed) as a 16-bit mono WAV in pieces of one second,
// scaled by the gain that puts the first 10 s at a peak of 0.5 (later peaks clip at full
// scale). Throws tessera::Error when the file cannot be written.
void write_speech_like_wav(const std::string& path, int sample_rate, double seconds, unsigned seed);

}  // namespace tessera::bench
