// train.cpp — `tessera train --config FILE --out RUN [--set k=v]... [--resume]`.
#include <atomic>
#include <cmath>
#include <csignal>
#include <cstdio>
#include <filesystem>
#include <unistd.h>

#include "audio/atomic_file.h"
#include "audio/error.h"
#include "audio/folder_lock.h"
#include "cli/command.h"
#include "cli/output_path.h"
#include "cli/progress.h"
#include "quant/experiment_config.h"
#include "quant/trainer.h"

namespace tessera::cli {
namespace {

std::atomic<bool> g_stop{false};
extern "C" void on_interrupt(int) { g_stop.store(true); }

struct TrainArgs {
  ConfigArgs config;
  std::string out, corpus;
  bool resume = false;
};

std::string stage_list(const std::vector<int>& v) {
  std::string s;
  for (int x : v) s += (s.empty() ? "" : "/") + std::to_string(x);
  return s;
}

int run_train(TrainArgs& a) {
  std::vector<std::string> sets = a.config.overrides;
  if (!a.corpus.empty()) sets.push_back("train.corpus=" + a.corpus);
  const quant::ExperimentConfig cfg = quant::load_experiment(a.config.config, sets);
  namespace fs = std::filesystem;
  const FolderLock lock(a.out, "train");
  note_lock_takeover(lock);
  remove_stale_temporaries(a.out);
  std::error_code ec;
  if (!a.resume && (fs::exists(fs::path(a.out) / "model.safetensors", ec) ||
                    fs::exists(fs::path(a.out) / "train-state.safetensors", ec)))
    throw Error("'" + a.out + "' already holds a model; pass --resume to continue it, or choose another --out");

  std::printf("corpus    %s\n", cfg.train.corpus.c_str());
  Progress load("loading corpus", 1, "files/s");
  quant::Trainer trainer(cfg, a.out, [&](std::size_t d, std::size_t n) { load.update(double(d) / double(n)); });
  const auto& c = trainer.corpus();
  std::printf("          %zu training files (%.1f min), %zu held out (%.1f min)\n", c.train.size(),
              c.train_seconds() / 60, c.validation.size(), c.validation_seconds() / 60);
  std::printf("model     %zu parameters + %d x %d codes x %d dims, %.1f code frames/s, %.0f bit/s at full depth\n",
              trainer.model().slab().count(), cfg.codebooks.stages, cfg.codebooks.codes, cfg.codebooks.dim,
              cfg.code_rate(), cfg.code_rate() * cfg.codebooks.stages * std::log2(double(cfg.codebooks.codes)));
  if (a.resume) {
    const quant::ResumeReport rep = trainer.resume();
    std::printf("resumed   at step %lld of %d\n", (long long)trainer.step(), cfg.train.steps);
    if (rep.model_rewritten)
      std::fprintf(stderr, "note: model.safetensors was missing or older than the training state "
                           "(interrupted between the two writes); rewritten from the state\n");
    if (rep.metrics_lines_dropped)
      std::fprintf(stderr, "note: %d metrics.jsonl line(s) past step %lld dropped; those steps are logged again\n",
                   rep.metrics_lines_dropped, (long long)trainer.step());
  }
  std::printf("training  %d steps, batch %d x %d frames, %d threads -> %s\n", cfg.train.steps, cfg.train.batch_size,
              cfg.train.segment_frames, quant::resolve_threads(cfg.train.threads), a.out.c_str());
  std::fflush(stdout);

  std::signal(SIGINT, on_interrupt);
  std::signal(SIGTERM, on_interrupt);
  const bool tty = ::isatty(2);
  Progress bar("train", cfg.train.steps, "steps/s");
  std::int64_t last_val_printed = 0;
  trainer.run(&g_stop, [&](const quant::StepReport& r) {
    char extra[256];
    std::snprintf(extra, sizeof extra, " loss %.3f  val %.3f  L1 %.3f  codes %s  %.0f audio-s/s", r.loss,
                  r.validation_loss, r.validation_mel_l1, stage_list(r.codes_used).c_str(), r.audio_s_per_s);
    if (tty) {
      bar.update(double(r.step), extra);
    } else if (r.validation_loss >= 0 && r.step - last_val_printed >= cfg.train.validate_every) {
      last_val_printed = r.step;
      std::fprintf(stderr, "step %lld/%lld%s  eta %s\n", (long long)r.step, (long long)r.total, extra,
                   format_duration(r.eta_s).c_str());
    }
  });
  if (tty) bar.finish();
  std::signal(SIGINT, SIG_DFL);
  std::signal(SIGTERM, SIG_DFL);
  if (g_stop.load()) {
    std::printf("stopped   at step %lld; checkpoint written; continue with --resume\n", (long long)trainer.step());
    return 130;
  }
  const quant::ValidationReport v = trainer.validate();
  std::printf("\n| depth | kbps | held-out log-mel L1 |\n|---|---|---|\n");
  for (std::size_t d = 0; d < v.mel_l1.size(); ++d)
    std::printf("| %zu | %.3f | %.4f |\n", d + 1,
                cfg.code_rate() * double(d + 1) * std::log2(double(cfg.codebooks.codes)) / 1000, v.mel_l1[d]);
  std::printf("\nmodel     %s (step %lld)\nmetrics   %s\n", trainer.model_path().c_str(), (long long)trainer.step(),
              trainer.metrics_path().c_str());
  return 0;
}

}  // namespace

Run register_train(CLI::App& app) {
  auto a = std::make_shared<TrainArgs>();
  CLI::App* cmd = app.add_subcommand("train", "train a tokenizer on a corpus of recordings");
  a->config.add_to(*cmd);
  cmd->add_option("-o,--out", a->out, "run folder (model, training state, metrics, resolved config)")->required();
  cmd->add_option("--corpus", a->corpus, "folder or list file of audio (same as --set train.corpus=...)");
  cmd->add_flag("--resume", a->resume, "continue from the run folder's last checkpoint");
  return [a] { return run_train(*a); };
}

}  // namespace tessera::cli
