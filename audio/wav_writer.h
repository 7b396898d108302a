// wav_writer.h — a mono WAV written block by block, with save_wav's peak limiting, in memory
// that does not grow with the length: samples go to an unnamed temporary file (float32)
// while their peak is tracked; commit() picks the one gain for the whole signal and writes
// the WAV atomically (AtomicFile). save_wav (audio_io.h) writes through it.
//
//   WavWriter w("out.wav", 16000);   w.write(block, n); ...;   SaveReport r = w.commit();
#pragma once
#include <cstdint>
#include <cstdio>
#include <memory>
#include <string>

#include "audio/audio_io.h"

namespace tessera::audio {

class WavWriter {
 public:
  // Throws tessera::Error for a sample rate ≤ 0 (naming path) or no temporary file.
  WavWriter(std::string path, int sample_rate, SampleFormat format = SampleFormat::pcm16, double peak_dbfs = -1.0);
  // Throws tessera::Error if a sample is NaN or Inf; nothing is written to path then.
  void write(const float* x, std::size_t n);
  // Scales so the peak is at most peak_dbfs (never up) and writes path. Once.
  SaveReport commit();
  std::int64_t samples() const { return n_; }

 private:
  struct Close {
    void operator()(std::FILE* f) const { std::fclose(f); }
  };
  std::string path_;
  int rate_;
  SampleFormat format_;
  double peak_dbfs_;
  std::unique_ptr<std::FILE, Close> tmp_;
  SaveReport rep_;
  std::int64_t n_ = 0;
};

}  // namespace tessera::audio
