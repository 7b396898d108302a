// audio_io.cpp — whole-file load and save (over AudioStream and WavWriter), peak normalisation.
#include "audio/audio_io.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <memory>
#include <sstream>
#include <unistd.h>

#include "audio/audio_stream.h"
#include "audio/wav_writer.h"
#include "audio/error.h"

namespace tessera::audio {

// Both read through AudioStream, so whole-file and streamed samples agree bit for bit.
static Audio read_all(AudioStream& in, SourceInfo* info) {
  Audio out;
  out.sample_rate = in.sample_rate();
  // The header's length is only a claim (compressed files are not checked against their
  // size): grow block by block, so a forged length cannot demand gigabytes up front.
  constexpr std::size_t kBlock = 65536;
  std::size_t n = 0;
  for (;;) {
    out.samples.resize(n + kBlock);
    const std::size_t got = in.read(out.samples.data() + n, kBlock);
    n += got;
    if (got == 0) break;   // read() returning 0 runs the end-of-file truncation checks
  }
  out.samples.resize(n);
  out.samples.shrink_to_fit();
  if (info) *info = in.source();   // after the reads: peak and clipping cover the whole file
  return out;
}

Audio load_audio(const std::string& path, SourceInfo* info) {
  AudioStream in(path);
  return read_all(in, info);
}

Audio load_audio_as(const std::string& path, int sample_rate, const double* normalize_dbfs,
                    SourceInfo* info) {
  AudioStream in(path, sample_rate, normalize_dbfs);
  return read_all(in, info);
}

void normalize_peak(std::vector<float>& samples, double dbfs) {
  float peak = 0;
  for (float s : samples) peak = std::max(peak, std::fabs(s));
  if (peak <= 0) return;
  const float gain = float(std::pow(10.0, dbfs / 20.0) / peak);
  for (float& s : samples) s *= gain;
}

SaveReport save_wav(const std::string& path, const std::vector<float>& samples, int sample_rate,
                    SampleFormat format, double peak_dbfs) {
  WavWriter w(path, sample_rate, format, peak_dbfs);
  w.write(samples.data(), samples.size());
  return w.commit();
}

}  // namespace tessera::audio
