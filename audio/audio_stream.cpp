// audio_stream.cpp — libsndfile block reads, channel average, streaming libsoxr, checks.
#include "audio/audio_stream.h"

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <sstream>

#include <sndfile.h>
#include <soxr.h>

#include "audio/error.h"

namespace tessera::audio {
namespace {

constexpr int kMaxChannels = 256;
constexpr int kMinRate = 1000, kMaxRate = 768000;
constexpr std::size_t kBlockFrames = 8192;  // frames per libsndfile read
// Within one 16-bit step of full scale; a run of 3 or more such samples is the usual sign
// of clipping (common practice in clip detectors).
constexpr float kFullScale = 32766.0f / 32768.0f;
constexpr long long kClipRun = 3;

std::string sndfile_message(SNDFILE* f) { return house_style(sf_strerror(f)); }

std::string describe_format(int format) {
  SF_FORMAT_INFO info{};
  info.format = format & SF_FORMAT_TYPEMASK;
  std::string major = sf_command(nullptr, SFC_GET_FORMAT_INFO, &info, sizeof info) == 0 && info.name
                          ? info.name : "unknown container";
  SF_FORMAT_INFO sub{};
  sub.format = format & SF_FORMAT_SUBMASK;
  std::string minor = sf_command(nullptr, SFC_GET_FORMAT_INFO, &sub, sizeof sub) == 0 && sub.name
                          ? sub.name : "unknown encoding";
  return major + ", " + minor;
}

}  // namespace

void AudioStream::SfClose::operator()(sf_private_tag* f) const { sf_close(f); }
void AudioStream::SoxrDelete::operator()(soxr* s) const { soxr_delete(s); }

AudioStream::AudioStream(const std::string& path, int sample_rate, const double* normalize_dbfs)
    : path_(path), rate_(sample_rate) {
  if (sample_rate < 0) throw Error("cannot resample '" + path + "' to " + std::to_string(sample_rate) + " Hz");
  open();
  if (normalize_dbfs) {
    // The peak of what read() delivers, so the gain equals normalize_peak on the whole signal.
    std::vector<float> block(kBlockFrames);
    float peak = 0;
    while (const std::size_t n = read(block.data(), block.size()))
      for (std::size_t i = 0; i < n; ++i) peak = std::max(peak, std::fabs(block[i]));
    open();
    if (peak > 0) gain_ = float(std::pow(10.0, *normalize_dbfs / 20.0) / peak);
  }
}

AudioStream::~AudioStream() = default;
AudioStream::AudioStream(AudioStream&&) noexcept = default;
AudioStream& AudioStream::operator=(AudioStream&&) noexcept = default;

void AudioStream::open() {
  std::error_code ec;
  if (!std::filesystem::exists(path_, ec)) throw Error("cannot open audio file '" + path_ + "': no such file");
  if (std::filesystem::is_directory(path_, ec)) throw Error("cannot open audio file '" + path_ + "': it is a folder");
  if (std::filesystem::is_regular_file(path_, ec) && std::filesystem::file_size(path_, ec) == 0 && !ec)
    throw Error("audio file '" + path_ + "' is empty (0 bytes)");
  SF_INFO sfinfo{};
  file_.reset(sf_open(path_.c_str(), SFM_READ, &sfinfo));
  if (!file_) throw Error("cannot open audio file '" + path_ + "': " + sndfile_message(nullptr));
  if (sfinfo.channels <= 0 || sfinfo.channels > kMaxChannels)
    throw Error("audio file '" + path_ + "' has " + std::to_string(sfinfo.channels) + " channels; expected 1 to " +
                std::to_string(kMaxChannels));
  if (sfinfo.samplerate < kMinRate || sfinfo.samplerate > kMaxRate)
    throw Error("audio file '" + path_ + "' has a sample rate of " + std::to_string(sfinfo.samplerate) +
                " Hz; expected " + std::to_string(kMinRate) + " to " + std::to_string(kMaxRate) + " Hz");
  if (sfinfo.frames <= 0) throw Error("audio file '" + path_ + "' holds no samples");
  // Guard against headers that claim more data than the file could hold.
  const auto file_bytes = std::filesystem::file_size(path_, ec);
  const bool compressed = (sfinfo.format & SF_FORMAT_TYPEMASK) == SF_FORMAT_FLAC ||
                          (sfinfo.format & SF_FORMAT_TYPEMASK) == SF_FORMAT_OGG;
  if (!compressed && !ec && double(sfinfo.frames) * sfinfo.channels > 8.0 * double(file_bytes) + 1e6)
    throw Error("audio file '" + path_ + "' claims more samples than it holds (damaged header?)");
  // libsndfile shortens the data chunk of a cut file to what is there and notes it in its
  // log ("data : 32000 (should be 200)"); a cut file is refused rather than half-read.
  {
    std::vector<char> log(8192, '\0');
    sf_command(file_.get(), SFC_GET_LOG_INFO, log.data(), int(log.size()) - 1);
    std::istringstream lines(std::string(log.data()));
    for (std::string line; std::getline(lines, line);)
      if ((line.rfind("data", 0) == 0 || line.rfind("SSND", 0) == 0) && line.find("(should be") != std::string::npos)
        throw Error("audio file '" + path_ + "' is truncated: its header promises more data than the file holds");
  }
  info_ = {sfinfo.channels, sfinfo.samplerate, sfinfo.frames, describe_format(sfinfo.format)};
  sf_command(file_.get(), SFC_SET_NORM_FLOAT, nullptr, SF_TRUE);
  if (rate_ == 0) rate_ = sfinfo.samplerate;
  raw_.resize(kBlockFrames * std::size_t(sfinfo.channels));
  in_frames_ = out_done_ = 0;
  clip_run_ = 0;
  source_done_ = flushed_ = false;
  mono_.clear();
  mono_pos_ = 0;
  soxr_.reset();
  if (rate_ == sfinfo.samplerate) {
    out_len_ = sfinfo.frames;
    return;
  }
  // As resample(): high quality, and round(len · to / from) output samples.
  out_len_ = std::llround(double(sfinfo.frames) * rate_ / sfinfo.samplerate);
  soxr_io_spec_t io = soxr_io_spec(SOXR_FLOAT32_I, SOXR_FLOAT32_I);
  soxr_quality_spec_t q = soxr_quality_spec(SOXR_HQ, 0);
  soxr_error_t err = nullptr;
  soxr_.reset(soxr_create(sfinfo.samplerate, rate_, 1, &err, &io, &q, nullptr));
  if (err || !soxr_) throw Error(std::string("resampling failed: ") + (err ? err : "no resampler"));
  mono_.reserve(kBlockFrames);
}

std::size_t AudioStream::read_source(float* out, std::size_t n) {
  const int ch = info_.channels;
  n = std::min(n, kBlockFrames);
  const sf_count_t got = sf_readf_float(file_.get(), raw_.data(), sf_count_t(n));
  if (got <= 0) {
    if (sf_error(file_.get()) != SF_ERR_NO_ERROR)
      throw Error("cannot read audio file '" + path_ + "': " + sndfile_message(file_.get()));
    if (in_frames_ == 0) throw Error("audio file '" + path_ + "' holds no samples (truncated?)");
    if (in_frames_ < info_.frames)
      throw Error("audio file '" + path_ + "' is truncated: its header promises " + std::to_string(info_.frames) +
                  " frames, the file holds " + std::to_string(in_frames_));
    return 0;
  }
  for (sf_count_t i = 0; i < got; ++i) {
    float sum = 0;
    for (int c = 0; c < ch; ++c) sum += raw_[std::size_t(i) * ch + c];
    out[i] = sum / float(ch);
    if (!std::isfinite(out[i]))
      throw Error("audio file '" + path_ + "' holds a non-finite sample (NaN or Inf) at " +
                  std::to_string(double(in_frames_ + i) / info_.sample_rate) + " s");
    const float a = std::fabs(out[i]);
    info_.peak = std::max(info_.peak, a);
    if (a >= kFullScale) {
      ++clip_run_;
    } else {
      if (clip_run_ >= kClipRun) info_.clipped_samples += clip_run_;
      clip_run_ = 0;
    }
  }
  in_frames_ += got;
  return std::size_t(got);
}

std::size_t AudioStream::read(float* out, std::size_t n) {
  std::size_t done = 0;
  if (!soxr_) {
    done = read_source(out, n);
  } else {
    while (done < n && out_done_ < out_len_) {
      const std::size_t want = std::size_t(std::min<std::int64_t>(std::int64_t(n - done), out_len_ - out_done_));
      std::size_t odone = 0;
      if (mono_pos_ == mono_.size() && !source_done_) {
        mono_.resize(kBlockFrames);
        mono_.resize(read_source(mono_.data(), mono_.size()));
        mono_pos_ = 0;
        source_done_ = mono_.empty();
      }
      if (!source_done_) {
        std::size_t idone = 0;
        const soxr_error_t err = soxr_process(soxr_.get(), mono_.data() + mono_pos_, mono_.size() - mono_pos_, &idone,
                                              out + done, want, &odone);
        if (err) throw Error(std::string("resampling failed: ") + err);
        mono_pos_ += idone;
      } else if (!flushed_) {
        const soxr_error_t err = soxr_process(soxr_.get(), nullptr, 0, nullptr, out + done, want, &odone);
        if (err) throw Error(std::string("resampling failed: ") + err);
        flushed_ = odone == 0;
      } else {
        // soxr may deliver a few samples fewer at the very end: zeros, as resample().
        std::fill_n(out + done, want, 0.0f);
        odone = want;
      }
      done += odone, out_done_ += std::int64_t(odone);
    }
  }
  if (gain_ != 1.0f)
    for (std::size_t i = 0; i < done; ++i) out[i] *= gain_;
  return done;
}

SourceInfo AudioStream::source() const {
  SourceInfo s = info_;
  if (clip_run_ >= kClipRun) s.clipped_samples += clip_run_;   // a run still open at the end
  return s;
}

}  // namespace tessera::audio
