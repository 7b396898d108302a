// wav_writer.cpp — float32 spill file, peak tracking, one gain, libsndfile write through AtomicFile.
#include "audio/wav_writer.h"

#include <algorithm>
#include <cerrno>
#include <cmath>
#include <vector>

#include <sndfile.h>

#include "audio/atomic_file.h"
#include "audio/error.h"

namespace tessera::audio {
namespace {

struct SndfileCloser {
  void operator()(SNDFILE* f) const { sf_close(f); }
};

}  // namespace

WavWriter::WavWriter(std::string path, int sample_rate, SampleFormat format, double peak_dbfs)
    : path_(std::move(path)), rate_(sample_rate), format_(format), peak_dbfs_(peak_dbfs) {
  if (sample_rate <= 0) throw Error("cannot write '" + path_ + "': sample rate must be positive");
  tmp_.reset(std::tmpfile());
  if (!tmp_) throw Error("cannot write '" + path_ + "': no temporary file for the samples");
}

void WavWriter::write(const float* x, std::size_t n) {
  for (std::size_t i = 0; i < n; ++i) {
    if (!std::isfinite(x[i])) throw Error("cannot write '" + path_ + "': the signal holds NaN or Inf");
    const float a = std::fabs(x[i]);
    rep_.input_peak = std::max(rep_.input_peak, a);
    if (a > 1.0f) ++rep_.clipped;
  }
  if (n && std::fwrite(x, sizeof(float), n, tmp_.get()) != n)
    throw Error("cannot write '" + path_ + "': the temporary file is full");
  n_ += std::int64_t(n);
}

SaveReport WavWriter::commit() {
  const double limit = std::pow(10.0, std::min(peak_dbfs_, 0.0) / 20.0);
  double gain = 1.0;
  if (rep_.input_peak > limit) {
    gain = limit / rep_.input_peak;
    rep_.limited = true;
    rep_.gain_db = 20.0 * std::log10(gain);
  }
  std::rewind(tmp_.get());
  // libsndfile writes through the temporary file's descriptor; commit() renames it into place.
  AtomicFile out(path_);
  SF_INFO sfinfo{};
  sfinfo.samplerate = rate_;
  sfinfo.channels = 1;
  sfinfo.format = SF_FORMAT_WAV | (format_ == SampleFormat::pcm16 ? SF_FORMAT_PCM_16 : SF_FORMAT_FLOAT);
  {
    // On a failed write the system's reason (errno: "no space left on device") says more
    // than libsndfile's summary of it.
    errno = 0;
    std::unique_ptr<SNDFILE, SndfileCloser> f(sf_open_fd(out.fd(), SFM_WRITE, &sfinfo, /*close_desc=*/SF_FALSE));
    if (!f) throw Error("cannot write '" + path_ + "': " + (errno ? system_message(errno) : house_style(sf_strerror(nullptr))));
    constexpr std::size_t kBlock = 65536;
    std::vector<float> in(kBlock), scaled(kBlock);
    std::vector<short> pcm(kBlock);
    for (std::int64_t done = 0; done < n_;) {
      const std::size_t n = std::size_t(std::min<std::int64_t>(n_ - done, std::int64_t(kBlock)));
      if (std::fread(in.data(), sizeof(float), n, tmp_.get()) != n)
        throw Error("cannot write '" + path_ + "': the temporary file cannot be read back");
      sf_count_t wrote;
      // Scaling to int16 is done here, rounding to nearest (libsndfile's own float path
      // truncates when clipping is enabled, which costs 6 dB of SNR).
      if (format_ == SampleFormat::pcm16) {
        for (std::size_t i = 0; i < n; ++i)
          pcm[i] = short(std::clamp(std::lround(double(in[i]) * gain * 32767.0), -32768L, 32767L));
        wrote = sf_writef_short(f.get(), pcm.data(), sf_count_t(n));
      } else {
        for (std::size_t i = 0; i < n; ++i) scaled[i] = float(in[i] * gain);
        wrote = sf_writef_float(f.get(), scaled.data(), sf_count_t(n));
      }
      if (wrote != sf_count_t(n))
        throw Error("cannot write '" + path_ + "': " + (errno ? system_message(errno) : house_style(sf_strerror(f.get()))));
      done += std::int64_t(n);
    }
    sf_write_sync(f.get());
  }
  out.commit();
  return rep_;
}

}  // namespace tessera::audio
