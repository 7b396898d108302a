// audio_io.cpp — libsndfile reading/writing, downmix, peak limiting.
#include "audio/audio_io.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <filesystem>
#include <limits>
#include <memory>
#include <sstream>
#include <string_view>
#include <unistd.h>

#include <sndfile.h>

#include "audio/atomic_file.h"
#include "audio/error.h"
#include "audio/resample.h"

namespace tessera::audio {
namespace {

struct SndfileCloser {
  void operator()(SNDFILE* f) const { sf_close(f); }
};
using SndfileHandle = std::unique_ptr<SNDFILE, SndfileCloser>;

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

constexpr int kMaxChannels = 256;
constexpr int kMinRate = 1000, kMaxRate = 768000;

// libsndfile's virtual I/O over a byte buffer (read only).
struct MemoryFile {
  std::string_view bytes;
  sf_count_t pos = 0;
};
sf_count_t memory_length(void* user) { return sf_count_t(static_cast<MemoryFile*>(user)->bytes.size()); }
sf_count_t memory_tell(void* user) { return static_cast<MemoryFile*>(user)->pos; }
sf_count_t memory_seek(sf_count_t offset, int whence, void* user) {
  auto* m = static_cast<MemoryFile*>(user);
  const sf_count_t size = sf_count_t(m->bytes.size());
  const sf_count_t base = whence == SEEK_CUR ? m->pos : whence == SEEK_END ? size : 0;
  if (offset < -base || offset > size - base) return -1;   // stays within [0, size]
  m->pos = base + offset;
  return m->pos;
}
sf_count_t memory_read(void* dst, sf_count_t count, void* user) {
  auto* m = static_cast<MemoryFile*>(user);
  const sf_count_t n = std::clamp<sf_count_t>(count, 0, sf_count_t(m->bytes.size()) - m->pos);
  if (n > 0) std::memcpy(dst, m->bytes.data() + m->pos, std::size_t(n));
  m->pos += n;
  return n;
}
sf_count_t memory_write(const void*, sf_count_t, void*) { return 0; }

// Everything after opening, shared by the file and the memory forms: checks the header,
// reads, downmixes and checks the samples. `file_bytes` is the encoded size (unknown: the
// largest value).
Audio read_opened(SNDFILE* sf, const SF_INFO& sfinfo, const std::string& path, std::uint64_t file_bytes,
                  SourceInfo* info) {
  if (sfinfo.channels <= 0 || sfinfo.channels > kMaxChannels)
    throw Error("audio file '" + path + "' has " + std::to_string(sfinfo.channels) +
                " channels; expected 1 to " + std::to_string(kMaxChannels));
  if (sfinfo.samplerate < kMinRate || sfinfo.samplerate > kMaxRate)
    throw Error("audio file '" + path + "' has a sample rate of " + std::to_string(sfinfo.samplerate) +
                " Hz; expected " + std::to_string(kMinRate) + " to " + std::to_string(kMaxRate) + " Hz");
  if (sfinfo.frames <= 0) throw Error("audio file '" + path + "' holds no samples");
  // Guard against headers that claim more data than the file could hold.
  const bool compressed = (sfinfo.format & SF_FORMAT_TYPEMASK) == SF_FORMAT_FLAC ||
                          (sfinfo.format & SF_FORMAT_TYPEMASK) == SF_FORMAT_OGG;
  if (!compressed && double(sfinfo.frames) * sfinfo.channels > 8.0 * double(file_bytes) + 1e6)
    throw Error("audio file '" + path + "' claims more samples than it holds (damaged header?)");

  // libsndfile shortens the data chunk of a cut file to what is there and notes it in its
  // log ("data : 32000 (should be 200)"); a cut file is refused rather than half-read.
  {
    std::vector<char> log(8192, '\0');
    sf_command(sf, SFC_GET_LOG_INFO, log.data(), int(log.size()) - 1);
    std::istringstream lines(std::string(log.data()));
    for (std::string line; std::getline(lines, line);)
      if ((line.rfind("data", 0) == 0 || line.rfind("SSND", 0) == 0) && line.find("(should be") != std::string::npos)
        throw Error("audio file '" + path + "' is truncated: its header promises more data than the file holds");
  }
  if (info) {
    info->channels = sfinfo.channels;
    info->sample_rate = sfinfo.samplerate;
    info->frames = sfinfo.frames;
    info->format = describe_format(sfinfo.format);
  }
  sf_command(sf, SFC_SET_NORM_FLOAT, nullptr, SF_TRUE);
  Audio out;
  out.sample_rate = sfinfo.samplerate;
  const int ch = sfinfo.channels;
  constexpr sf_count_t kChunk = 65536;
  std::vector<float> buf(std::size_t(kChunk) * ch);
  // The header's frame count is only a hint for compressed files: reserve no more than the
  // encoded size could plausibly hold, so a forged count cannot demand gigabytes up front.
  const double plausible = std::min(16.0 * double(file_bytes) + 65536.0, double(1u << 31));
  out.samples.reserve(std::size_t(std::min(double(sfinfo.frames), plausible)));
  for (;;) {
    const sf_count_t got = sf_readf_float(sf, buf.data(), kChunk);
    if (got <= 0) break;
    for (sf_count_t i = 0; i < got; ++i) {
      float sum = 0;
      for (int c = 0; c < ch; ++c) sum += buf[std::size_t(i) * ch + c];
      out.samples.push_back(sum / float(ch));
    }
  }
  if (sf_error(sf) != SF_ERR_NO_ERROR)
    throw Error("cannot read audio file '" + path + "': " + sf_strerror(sf));
  if (out.samples.empty()) throw Error("audio file '" + path + "' holds no samples (truncated?)");
  if (sf_count_t(out.samples.size()) < sfinfo.frames)
    throw Error("audio file '" + path + "' is truncated: its header promises " + std::to_string(sfinfo.frames) +
                " frames, the file holds " + std::to_string(out.samples.size()));
  for (std::size_t i = 0; i < out.samples.size(); ++i)
    if (!std::isfinite(out.samples[i]))
      throw Error("audio file '" + path + "' holds a non-finite sample (NaN or Inf) at " +
                  std::to_string(double(i) / out.sample_rate) + " s");
  return out;
}

}  // namespace

Audio load_audio(const std::string& path, SourceInfo* info) {
  std::error_code ec;
  if (!std::filesystem::exists(path, ec))
    throw Error("cannot open audio file '" + path + "': no such file");
  if (std::filesystem::is_directory(path, ec))
    throw Error("cannot open audio file '" + path + "': it is a folder");
  SF_INFO sfinfo{};
  SndfileHandle f(sf_open(path.c_str(), SFM_READ, &sfinfo));
  if (!f) throw Error("cannot open audio file '" + path + "': " + sf_strerror(nullptr));
  const auto file_bytes = std::filesystem::file_size(path, ec);
  return read_opened(f.get(), sfinfo, path, ec ? std::numeric_limits<std::uint64_t>::max() : file_bytes, info);
}

Audio load_audio_memory(std::string_view bytes, const std::string& name, SourceInfo* info) {
  MemoryFile m{bytes};
  SF_VIRTUAL_IO io{memory_length, memory_seek, memory_read, memory_write, memory_tell};
  SF_INFO sfinfo{};
  SndfileHandle f(sf_open_virtual(&io, SFM_READ, &sfinfo, &m));
  if (!f) throw Error("cannot open audio file '" + name + "': " + sf_strerror(nullptr));
  return read_opened(f.get(), sfinfo, name, bytes.size(), info);
}

Audio load_audio_as(const std::string& path, int sample_rate, const double* normalize_dbfs,
                    SourceInfo* info) {
  Audio a = load_audio(path, info);
  if (a.sample_rate != sample_rate) {
    a.samples = resample(a.samples, a.sample_rate, sample_rate);
    a.sample_rate = sample_rate;
  }
  if (normalize_dbfs) normalize_peak(a.samples, *normalize_dbfs);
  return a;
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
  if (sample_rate <= 0) throw Error("cannot write '" + path + "': sample rate must be positive");
  SaveReport rep;
  for (float s : samples) {
    if (!std::isfinite(s)) throw Error("cannot write '" + path + "': the signal holds NaN or Inf");
    const float a = std::fabs(s);
    rep.input_peak = std::max(rep.input_peak, a);
    if (a > 1.0f) ++rep.clipped;
  }
  const double limit = std::pow(10.0, std::min(peak_dbfs, 0.0) / 20.0);
  double gain = 1.0;
  if (rep.input_peak > limit) {
    gain = limit / rep.input_peak;
    rep.limited = true;
    rep.gain_db = 20.0 * std::log10(gain);
  }
  // Scaling to int16 is done here, rounding to nearest (libsndfile's own float path
  // truncates when clipping is enabled, which costs 6 dB of SNR).
  std::vector<float> scaled;
  std::vector<short> pcm;
  if (format == SampleFormat::pcm16) {
    pcm.resize(samples.size());
    for (std::size_t i = 0; i < samples.size(); ++i)
      pcm[i] = short(std::clamp(std::lround(double(samples[i]) * gain * 32767.0), -32768L, 32767L));
  } else {
    scaled.resize(samples.size());
    for (std::size_t i = 0; i < samples.size(); ++i) scaled[i] = float(samples[i] * gain);
  }

  // libsndfile writes through the temporary file's descriptor; commit() renames it into place.
  AtomicFile out(path);
  SF_INFO sfinfo{};
  sfinfo.samplerate = sample_rate;
  sfinfo.channels = 1;
  sfinfo.format = SF_FORMAT_WAV | (format == SampleFormat::pcm16 ? SF_FORMAT_PCM_16 : SF_FORMAT_FLOAT);
  {
    SndfileHandle f(sf_open_fd(out.fd(), SFM_WRITE, &sfinfo, /*close_desc=*/SF_FALSE));
    if (!f) throw Error("cannot write '" + path + "': " + sf_strerror(nullptr));
    const sf_count_t n = sf_count_t(samples.size());
    const sf_count_t wrote = format == SampleFormat::pcm16 ? sf_writef_short(f.get(), pcm.data(), n)
                                                           : sf_writef_float(f.get(), scaled.data(), n);
    if (wrote != n) throw Error("cannot write '" + path + "': " + sf_strerror(f.get()));
    sf_write_sync(f.get());
  }
  out.commit();
  return rep;
}

}  // namespace tessera::audio
