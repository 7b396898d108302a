// ladder.cpp — `tessera ladder --model MODEL IN -o DIR`: one utterance at every depth,
// beside the original and the oracle, as WAVs, ladder.json and a table.
#include <algorithm>
#include <cstdio>
#include <filesystem>

#include "audio/atomic_file.h"
#include "audio/audio_io.h"
#include "audio/error.h"
#include "cli/command.h"
#include "cli/output_path.h"
#include "cli/progress.h"
#include "cli/rate_distortion.h"
#include "quant/checkpoint.h"

namespace tessera::cli {
namespace fs = std::filesystem;
namespace {

struct LadderArgs {
  std::string model, input, out;
  int jobs = 0;
};

int run_ladder(const LadderArgs& a) {
  quant::ModelInfo info;
  auto tok = quant::load_model(a.model, a.jobs, &info);
  const quant::ExperimentConfig& cfg = tok->config();
  const double* norm = cfg.audio.normalize_input ? &cfg.audio.normalize_dbfs : nullptr;
  audio::SourceInfo src;
  const audio::Audio in = audio::load_audio_as(a.input, cfg.audio.sample_rate, norm, &src);
  print_input_warnings(src, a.input, cfg.audio);
  // Before the lock, which would make a file in the input's folder.
  std::vector<std::string> outputs = {"original.wav", "oracle.wav", "ladder.json"};
  for (int d = 1; d <= cfg.codebooks.stages; ++d) outputs.push_back("depth-" + std::to_string(d) + ".wav");
  std::error_code ec;
  for (const std::string& name : outputs)
    if (fs::exists(fs::path(a.out) / name, ec) && fs::equivalent(fs::path(a.out) / name, a.input, ec))
      throw Error("refusing to write into '" + a.out + "': it would overwrite the input");
  const FolderLock lock(a.out, "ladder");  // one writer: two ladders into one folder would mix their WAVs
  note_lock_takeover(lock);
  remove_stale_temporaries(a.out, [&](const std::string& target) {
    return std::find(outputs.begin(), outputs.end(), fs::path(target).filename().string()) != outputs.end();
  });

  Progress bar("ladder", cfg.codebooks.stages + 1, "syntheses/s");
  const quant::Ladder lad = quant::depth_ladder(*tok, in.samples, {}, /*keep_audio=*/true,
                                                [&](int d, int) { bar.update(d); });
  bar.finish();
  const int sr = cfg.audio.sample_rate;
  const double peak = cfg.audio.output_peak_dbfs;
  auto save = [&](const std::string& name, const std::vector<float>& x) {
    const fs::path p = fs::path(a.out) / name;
    warn_about_level(audio::save_wav(p.string(), x, sr, audio::SampleFormat::pcm16, peak), p.string());
  };
  save("original.wav", in.samples);
  save("oracle.wav", lad.oracle_audio);
  for (std::size_t i = 0; i < lad.depths.size(); ++i) save("depth-" + std::to_string(lad.depths[i].depth) + ".wav", lad.audio[i]);
  nlohmann::json j = rate_distortion_json(info.model_id, cfg.code_rate(), cfg.codebooks.codes, lad.depths, lad.oracle,
                                          lad.stages, lad.reencode_agreement);
  j["source"] = a.input;
  j["duration_s"] = lad.seconds;
  write_file_atomic((fs::path(a.out) / "ladder.json").string(), j.dump(2) + "\n");
  std::printf("%s: %.2f s, model %s\n\n%s\nwrote     %s/{original,oracle,depth-1..%d}.wav and ladder.json\n",
              a.input.c_str(), lad.seconds, info.model_id.c_str(),
              rate_distortion_table(lad.depths, lad.oracle, lad.stages, cfg.codebooks.codes, lad.reencode_agreement).c_str(), a.out.c_str(),
              cfg.codebooks.stages);
  return 0;
}

}  // namespace

Run register_ladder(CLI::App& app) {
  auto a = std::make_shared<LadderArgs>();
  CLI::App* cmd = app.add_subcommand("ladder", "one file decoded at every depth, beside the original and the oracle");
  cmd->add_option("--model", a->model, "model.safetensors")->required()->check(CLI::ExistingFile);
  cmd->add_option("input", a->input, "audio file")->required();
  cmd->add_option("-o,--out", a->out, "output folder")->required();
  cmd->add_option("--jobs", a->jobs, "threads (default: all cores)");
  return [a] { return run_ladder(*a); };
}

}  // namespace tessera::cli
