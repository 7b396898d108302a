// resynth.cpp — `tessera resynth IN -o OUT.wav`: the ceiling of the pipeline before any
// quantisation (load, log-mel, invert, Griffin-Lim, save) with metrics against the input.
#include <chrono>
#include <cstdio>
#include <filesystem>

#include <nlohmann/json.hpp>

#include "audio/audio_config_yaml.h"
#include "audio/audio_io.h"
#include "audio/error.h"
#include "audio/log_mel.h"
#include "audio/mel_inverse.h"
#include "audio/signal_metrics.h"
#include "cli/command.h"
#include "cli/output_path.h"
#include "cli/progress.h"

namespace tessera::cli {
namespace {

struct ResynthArgs {
  std::string input, output;
  ConfigArgs config;
  bool json = false;
  bool float_output = false;
};

int run_resynth(const ResynthArgs& a) {
  const audio::AudioConfig cfg = load_audio_settings(a.config);
  check_output_path(a.output, {a.input});

  audio::SourceInfo src;
  const double* norm = cfg.normalize_input ? &cfg.normalize_dbfs : nullptr;
  const audio::Audio in = audio::load_audio_as(a.input, cfg.sample_rate, norm, &src);
  print_input_warnings(src, a.input, cfg);
  if (!a.json) {
    std::printf("input     %s (%s, %d ch, %d Hz, %.2f s)\n", a.input.c_str(), src.format.c_str(),
                src.channels, src.sample_rate, in.duration());
    std::printf("settings  %d Hz, n_fft %d, window %d, hop %d, %d mels (%s, %.0f-%.0f Hz), "
                "%s, %d iterations\n",
                cfg.sample_rate, cfg.n_fft, cfg.win_length, cfg.hop_length, cfg.n_mels,
                audio::to_string(cfg.mel_scale), cfg.f_min, cfg.f_max, audio::to_string(cfg.inversion),
                cfg.griffin_lim_iters);
  }

  const auto t0 = std::chrono::steady_clock::now();
  const Eigen::MatrixXf mel = audio::log_mel(cfg, in.samples);
  Progress bar("resynth", cfg.griffin_lim_iters, "it/s");
  const std::vector<float> out = audio::invert_log_mel(
      cfg, mel, in.samples.size(), [&](int it, int) { if (!a.json) bar.update(it); });
  const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  if (!a.json && bar.elapsed() > 1.0) bar.finish();

  const audio::SaveReport rep = audio::save_wav(
      a.output, out, cfg.sample_rate,
      a.float_output ? audio::SampleFormat::float32 : audio::SampleFormat::pcm16, cfg.output_peak_dbfs);
  warn_about_level(rep, a.output);
  const audio::SignalMetrics m = audio::compare_signals(cfg, in.samples, out);
  const double rtf = seconds > 0 ? in.duration() / seconds : 0;

  if (a.json) {
    nlohmann::json j = {{"spectral_convergence", m.spectral_convergence}, {"lsd_db", m.lsd_db},
                        {"mcd_db", m.mcd_db}, {"mel_l1", m.mel_l1}, {"seconds", seconds},
                        {"realtime_factor", rtf}, {"output", a.output},
                        {"inversion", audio::to_string(cfg.inversion)},
                        {"iterations", cfg.griffin_lim_iters}};
    std::printf("%s\n", j.dump().c_str());
  } else {
    std::printf("output    %s\n", a.output.c_str());
    std::printf("time      %.3f s (%.1fx real time)\n\n", seconds, rtf);
    std::printf("| metric (output vs input)    | value  |\n|---|---|\n");
    std::printf("| spectral convergence        | %.4f |\n", m.spectral_convergence);
    std::printf("| log-spectral distance (dB)  | %.3f |\n", m.lsd_db);
    std::printf("| mel cepstral distortion (dB)| %.3f |\n", m.mcd_db);
    std::printf("| log-mel L1                  | %.4f |\n", m.mel_l1);
  }
  return 0;
}

}  // namespace

Run register_resynth(CLI::App& app) {
  auto a = std::make_shared<ResynthArgs>();
  CLI::App* cmd = app.add_subcommand(
      "resynth", "log-mel -> Griffin-Lim -> audio, without quantisation: the pipeline's ceiling");
  cmd->add_option("input", a->input, "audio file (WAV, FLAC, OGG, AIFF)")->required();
  cmd->add_option("-o,--output", a->output, "output WAV")->required();
  a->config.add_to(*cmd);
  cmd->add_flag("--json", a->json, "print one JSON object instead of the table");
  cmd->add_flag("--float", a->float_output, "write 32-bit float WAV instead of 16-bit");
  return [a] { return run_resynth(*a); };
}

}  // namespace tessera::cli
