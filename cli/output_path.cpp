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

void warn_about_level(const audio::SaveReport& rep, const std::string& path) {
  if (rep.clipped > 0)
    std::fprintf(stderr, "warning: %lld samples of '%s' were beyond full scale; the output was "
                 "scaled by %.1f dB to avoid clipping\n", rep.clipped, path.c_str(), rep.gain_db);
  else if (rep.limited && rep.gain_db < -0.5)
    std::fprintf(stderr, "note: '%s' was peak-limited by %.1f dB\n", path.c_str(), rep.gain_db);
}

audio::AudioConfig load_audio_settings(const ConfigArgs& args) {
  ConfigDocument doc = args.config.empty() ? ConfigDocument::empty() : ConfigDocument::load(args.config);
  for (const auto& o : args.overrides) doc.apply_override(o);
  doc.check_sections({"audio", "model", "codebooks", "train"});
  ConfigSection s = doc.section("audio");
  return audio::read_audio_config(s);
}

}  // namespace tessera::cli
