// audio_io.h — read any file libsndfile reads, write WAV with peak limiting.
// Samples are mono float in [-1, 1] after loading (channels averaged).
#pragma once
#include <string>
#include <string_view>
#include <vector>

namespace tessera::audio {

struct Audio {
  std::vector<float> samples;  // mono
  int sample_rate = 0;         // Hz
  double duration() const { return sample_rate ? double(samples.size()) / sample_rate : 0.0; }
};

// What load() found in the file before downmixing and resampling.
struct SourceInfo {
  int channels = 0;
  int sample_rate = 0;
  long long frames = 0;
  std::string format;  // e.g. "WAV, 16-bit PCM"
  float peak = 0;                // largest |sample| after downmixing, before any normalisation
  long long clipped_samples = 0; // samples in runs of 3 or more at full scale (a clipped recording)
};

// Reads WAV, FLAC, OGG/Vorbis, AIFF (any bit depth libsndfile knows), averages the
// channels. Throws tessera::Error for a missing, unreadable, empty or non-finite file.
// Usage: Audio a = load_audio("in.flac"); // a.sample_rate is the file's rate
Audio load_audio(const std::string& path, SourceInfo* info = nullptr);

// load_audio, then resampling to `sample_rate` (libsoxr, high quality) and, when
// normalize_dbfs is given, peak normalisation to that level.
Audio load_audio_as(const std::string& path, int sample_rate, const double* normalize_dbfs = nullptr,
                    SourceInfo* info = nullptr);

enum class SampleFormat { pcm16, float32 };

struct SaveReport {
  float input_peak = 0;       // largest |sample| handed to save
  long long clipped = 0;      // samples that were beyond full scale (|x| > 1) before limiting
  bool limited = false;       // whether the gain was lowered to meet the peak limit
  double gain_db = 0;         // gain applied (≤ 0)
};

// Writes a mono WAV atomically (temporary file, then rename). The signal is scaled down
// so its peak is at most `peak_dbfs` (default −1 dBFS); never scaled up.
SaveReport save_wav(const std::string& path, const std::vector<float>& samples, int sample_rate,
                    SampleFormat format = SampleFormat::pcm16, double peak_dbfs = -1.0);

// Peak normalisation in place to `dbfs` (a silent signal stays silent).
void normalize_peak(std::vector<float>& samples, double dbfs);

}  // namespace tessera::audio
