// audio_stream.h — read an audio file block by block: libsndfile, channel average,
// streaming libsoxr resampling, optional peak normalisation; memory does not grow with the
// file. load_audio / load_audio_as (audio_io.h) read through it, so a file streamed here and
// the same file loaded whole hold the same samples bit for bit.
//
//   AudioStream in("talk.flac", 16000);             // throws tessera::Error (see audio_io.h)
//   std::vector<float> block(4096);
//   while (std::size_t n = in.read(block.data(), block.size())) use(block.data(), n);
//
// Errors: a missing, unreadable or empty file, a bad channel count or rate, a header that
// promises more data than the file holds, and non-finite samples (found when read) throw
// tessera::Error naming the file. Peak normalisation needs the whole file's peak, so the
// constructor then reads (and resamples) the file once before the real pass.
#pragma once
#include <cstdint>
#include <memory>
#include <string>
#include <vector>

#include "audio/audio_io.h"

struct sf_private_tag;   // libsndfile's SNDFILE
struct soxr;             // libsoxr's resampler

namespace tessera::audio {

class AudioStream {
 public:
  // sample_rate 0: the file's own rate (no resampling). normalize_dbfs: peak level, or null.
  AudioStream(const std::string& path, int sample_rate = 0, const double* normalize_dbfs = nullptr);
  ~AudioStream();
  AudioStream(AudioStream&&) noexcept;
  AudioStream& operator=(AudioStream&&) noexcept;

  // Up to n mono samples at sample_rate() into out; 0 once the file is done. The output
  // holds round(frames · to / from) samples in all (as resample()).
  std::size_t read(float* out, std::size_t n);

  int sample_rate() const { return rate_; }
  // The file's facts; peak and clipped_samples cover what has been read so far.
  SourceInfo source() const;
  // Samples read() delivers in all.
  std::int64_t length() const { return out_len_; }
  double duration() const { return double(out_len_) / rate_; }

 private:
  struct SfClose {
    void operator()(sf_private_tag* f) const;
  };
  struct SoxrDelete {
    void operator()(soxr* s) const;
  };
  void open();                         // (re)opens the file and the resampler
  std::size_t read_source(float* out, std::size_t n);  // mono samples at the file's rate

  std::string path_;
  int rate_ = 0;
  SourceInfo info_;
  std::unique_ptr<sf_private_tag, SfClose> file_;
  std::unique_ptr<soxr, SoxrDelete> soxr_;
  std::vector<float> raw_;             // interleaved block from libsndfile
  std::vector<float> mono_;            // its channel average, not yet taken by soxr
  std::size_t mono_pos_ = 0;
  std::int64_t in_frames_ = 0, out_done_ = 0, out_len_ = 0;
  long long clip_run_ = 0;             // full-scale samples in a row so far
  bool source_done_ = false, flushed_ = false;
  float gain_ = 1.0f;
};

}  // namespace tessera::audio
