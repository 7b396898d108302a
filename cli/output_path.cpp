// output_path.cpp — output checks and level warnings shared by subcommands.
#include "cli/output_path.h"

#include <cstdio>
#include <filesystem>

#include "audio/audio_config_yaml.h"
#include "audio/config_document.h"
#include "audio/error.h"

namespace tessera::cli {
namespace fs = std::filesystem;

void check_output_path(const std::string& output, const std::vector<std::string>& inputs) {
  std::error_code ec;
  for (const auto& in : inputs)
    if (fs::exists(output, ec) && fs::equivalent(output, in, ec))
      throw Error("refusing to write '" + output + "': it is an input file");
  const fs::path parent = fs::path(output).parent_path();
  if (!parent.empty() && !fs::is_directory(parent, ec))
    throw Error("cannot write '" + output + "': folder '" + parent.string() + "' does not exist");
  if (fs::is_directory(output, ec)) throw Error("cannot write '" + output + "': it is a folder");
}

void note_lock_takeover(const FolderLock& lock) {
  if (!lock.takeover().empty())
    std::fprintf(stderr, "note: took over the lock of %s, which is no longer running\n", lock.takeover().c_str());
}

void warn_about_level(const audio::SaveReport& rep, const std::string& path) {
  if (rep.clipped > 0)
    std::fprintf(stderr, "warning: %lld samples of '%s' were beyond full scale; the output was "
                 "scaled by %.1f dB to avoid clipping\n", rep.clipped, path.c_str(), rep.gain_db);
  else if (rep.limited && rep.gain_db < -0.5)
    std::fprintf(stderr, "note: '%s' was peak-limited by %.1f dB\n", path.c_str(), rep.gain_db);
}

std::vector<std::string> input_warnings(const audio::SourceInfo& src, const std::string& path,
                                        const audio::AudioConfig& cfg) {
  std::vector<std::string> w;
  char buf[512];
  if (src.channels > 2) {
    std::snprintf(buf, sizeof buf, "'%s' has %d channels; they are averaged into one", path.c_str(), src.channels);
    w.push_back(buf);
  }
  // Below -90 dBFS nothing is left but the last bit of 16-bit audio (about -90.3 dBFS).
  if (src.peak < 3.1623e-5f) {
    std::snprintf(buf, sizeof buf, "'%s' is silent (peak below -90 dBFS); its codes describe silence", path.c_str());
    w.push_back(buf);
  } else if (src.clipped_samples > 0) {
    std::snprintf(buf, sizeof buf, "'%s' looks clipped: %lld of %lld samples sit at full scale in runs of 3 or more",
                  path.c_str(), src.clipped_samples, src.frames);
    w.push_back(buf);
  }
  const double seconds = src.sample_rate > 0 ? double(src.frames) / src.sample_rate : 0;
  const double window = double(cfg.win_length) / cfg.sample_rate;
  if (seconds < window) {
    std::snprintf(buf, sizeof buf, "'%s' lasts %.3f s, less than one analysis window (%.3f s); its frames are "
                  "mostly padding", path.c_str(), seconds, window);
    w.push_back(buf);
  }
  return w;
}

void print_input_warnings(const audio::SourceInfo& src, const std::string& path, const audio::AudioConfig& cfg) {
  for (const std::string& m : input_warnings(src, path, cfg)) std::fprintf(stderr, "warning: %s\n", m.c_str());
}

audio::AudioConfig load_audio_settings(const ConfigArgs& args) {
  ConfigDocument doc = args.config.empty() ? ConfigDocument::empty() : ConfigDocument::load(args.config);
  for (const auto& o : args.overrides) doc.apply_override(o);
  doc.check_sections({"audio", "model", "codebooks", "train"});
  ConfigSection s = doc.section("audio");
  return audio::read_audio_config(s);
}

}  // namespace tessera::cli
