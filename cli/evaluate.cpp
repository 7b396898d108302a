// evaluate.cpp — `tessera evaluate --model MODEL INPUT... [--json] [--csv FILE]`: the
// rate–distortion curve of a model over a corpus (per file, mean and median), with the
// codebook use per stage.
#include <algorithm>
#include <cstdio>
#include <fstream>

#include "audio/atomic_file.h"
#include "audio/audio_io.h"
#include "audio/error.h"
#include "audio/file_list.h"
#include "cli/command.h"
#include "cli/file_workers.h"
#include "cli/output_path.h"
#include "cli/progress.h"
#include "cli/rate_distortion.h"
#include "quant/checkpoint.h"

namespace tessera::cli {
namespace {

struct EvaluateArgs {
  std::string model, csv;
  std::vector<std::string> inputs;
  bool json = false;
  int jobs = 0;
};

int run_evaluate(const EvaluateArgs& a) {
  quant::ModelInfo info;
  const std::vector<audio::InputFile> files = audio::expand_inputs(a.inputs);
  const WorkerPlan plan = plan_workers(a.jobs, files.size());
  const auto models = load_worker_models(a.model, plan, quant::load_model(a.model, plan.threads_per_worker, &info));
  const quant::ExperimentConfig& cfg = models[0]->config();
  const double* norm = cfg.audio.normalize_input ? &cfg.audio.normalize_dbfs : nullptr;
  quant::UsageStats usage(cfg.codebooks.stages, cfg.codebooks.codes);
  std::vector<quant::Ladder> all(files.size());
  std::vector<std::vector<std::string>> warnings(files.size());  // odd but usable input (cli/output_path.h)
  Progress bar("evaluate", double(files.size()), "files/s");
  double audio_s = 0;
  std::size_t n = 0;
  run_file_workers(
      files.size(), plan.workers,
      [&](std::size_t i, int w) {
        try {
          audio::SourceInfo src;
          const audio::Audio in = audio::load_audio_as(files[i].path, cfg.audio.sample_rate, norm, &src);
          warnings[i] = input_warnings(src, files[i].path, cfg.audio);
          all[i] = quant::depth_ladder(*models[std::size_t(w)], in.samples, {}, /*keep_audio=*/false);
        } catch (const Error& e) {
          throw Error(naming_file(files[i].path, e.what()));
        }
      },
      [&](std::size_t i) {
        for (const std::string& m : warnings[i]) bar.message("warning: " + m);
        usage.add_codes(all[i].codes);
        audio_s += all[i].seconds;
        char extra[64];
        std::snprintf(extra, sizeof extra, "  %.1f min audio", audio_s / 60);
        bar.update(double(++n), extra);
      });
  bar.finish();
  std::vector<quant::StageUsage> stages;
  for (int s = 0; s < cfg.codebooks.stages; ++s) stages.push_back(usage.stage(s));
  // Re-encode agreement weighted by frames: the share over the whole corpus.
  std::vector<double> reencode(std::size_t(cfg.codebooks.stages), 0.0);
  double frames = 0;
  for (const auto& l : all) {
    frames += double(l.codes.rows());
    for (std::size_t s = 0; s < reencode.size(); ++s) reencode[s] += l.reencode_agreement[s] * double(l.codes.rows());
  }
  for (double& r : reencode) r = frames > 0 ? r / frames : 0;
  // Entropy of the whole corpus's codes, not the mean of per-file entropies.
  const auto means = reduce_rows(all, mean_of), medians = reduce_rows(all, median_of);
  std::vector<quant::DepthRow> corpus_means = means;
  for (auto& r : corpus_means) r.entropy_kbps = quant::entropy_kbps(stages, r.depth, cfg.code_rate());
  const quant::OracleRow om = reduce_oracle(all, mean_of), omed = reduce_oracle(all, median_of);

  if (!a.csv.empty()) {
    std::string csv = "source,depth,kbps,entropy_kbps,feature_mel_l1,feature_mcd_db,mel_l1,mcd_db,spectral_convergence\n";
    char line[512];
    for (std::size_t i = 0; i < files.size(); ++i) {
      for (const auto& r : all[i].depths) {
        std::snprintf(line, sizeof line, ",%d,%.4f,%.4f,%.5f,%.4f,%.5f,%.4f,%.5f\n", r.depth, r.kbps, r.entropy_kbps,
                      r.feature_mel_l1, r.feature_mcd_db, r.mel_l1, r.mcd_db, r.spectral_convergence);
        csv += "\"" + files[i].path + "\"" + line;
      }
      const auto& o = all[i].oracle;
      std::snprintf(line, sizeof line, ",oracle,,,,,%.5f,%.4f,%.5f\n", o.mel_l1, o.mcd_db, o.spectral_convergence);
      csv += "\"" + files[i].path + "\"" + line;
    }
    write_file_atomic(a.csv, csv);
  }
  if (a.json) {
    nlohmann::json j = rate_distortion_json(info.model_id, cfg.code_rate(), cfg.codebooks.codes, corpus_means, om, stages, reencode);
    j["files"] = files.size();
    j["audio_s"] = audio_s;
    j["median"] = rate_distortion_json(info.model_id, cfg.code_rate(), cfg.codebooks.codes, medians, omed, stages)["depths"];
    j["oracle_median"] = {{"mel_l1", omed.mel_l1}, {"mcd_db", omed.mcd_db}, {"spectral_convergence", omed.spectral_convergence}};
    std::printf("%s\n", j.dump(2).c_str());
    return 0;
  }
  std::printf("model %s on %zu files (%.1f min)\n\nmean over files (entropy over the whole corpus):\n\n%s\n"
              "median over files:\n\n%s",
              info.model_id.c_str(), files.size(), audio_s / 60,
              rate_distortion_table(corpus_means, om, stages, cfg.codebooks.codes, reencode).c_str(),
              rate_distortion_table(medians, omed, {}, cfg.codebooks.codes).c_str());
  if (!a.csv.empty()) std::printf("\nper file: %s\n", a.csv.c_str());
  return 0;
}

}  // namespace

Run register_evaluate(CLI::App& app) {
  auto a = std::make_shared<EvaluateArgs>();
  CLI::App* cmd = app.add_subcommand("evaluate", "rate-distortion table of a model over a corpus, per depth and stage");
  cmd->add_option("--model", a->model, "model.safetensors")->required()->check(CLI::ExistingFile);
  cmd->add_option("inputs", a->inputs, "audio files, folders or list files")->required();
  cmd->add_flag("--json", a->json, "print one JSON object (the schema in README.md)");
  cmd->add_option("--csv", a->csv, "also write per-file rows to this CSV file");
  cmd->add_option("--jobs", a->jobs, "threads (default: all cores)");
  return [a] { return run_evaluate(*a); };
}

}  // namespace tessera::cli
