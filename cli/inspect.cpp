// inspect.cpp — `tessera inspect MODEL`: what a model file holds.
#include <cmath>
#include <cstdio>

#include "cli/command.h"
#include "quant/checkpoint.h"

namespace tessera::cli {
namespace {

int run_inspect(const std::string& path) {
  quant::ModelInfo info;
  auto tok = quant::load_model(path, 1, &info);
  const quant::ExperimentConfig& c = tok->config();
  const auto& m = c.model;
  std::printf("model      %s\nmodel id   %s\ntrained    %lld steps\n", path.c_str(), info.model_id.c_str(),
              (long long)info.step);
  std::printf("front end  %d Hz, n_fft %d, hop %d (%.0f frames/s), %d mels (%s)\n", c.audio.sample_rate,
              c.audio.n_fft, c.audio.hop_length, c.audio.frame_rate(), c.audio.n_mels, audio::to_string(c.audio.mel_scale));
  std::string strides, dil;
  for (int s : m.strides) strides += (strides.empty() ? "" : "x") + std::to_string(s);
  for (int d : m.dilations) dil += (dil.empty() ? "" : ",") + std::to_string(d);
  std::printf("encoder    Conv1d(%d->%d, k%d), per stage: %zu residual units (dilations %s) + Conv1d(k%d, stride s); "
              "strides %s; Conv1d(%d->%d, k%d)\n",
              m.n_mels, m.channels, m.kernel_in, m.dilations.size(), dil.c_str(), 2 * m.strides.front(),
              strides.c_str(), m.channels, m.latent_dim, m.kernel_out);
  std::printf("decoder    mirror with ConvTranspose1d up-sampling, Conv1d(%d->%d, k%d) out\n", m.channels, m.n_mels,
              m.decoder_kernel_out);
  std::printf("codebooks  %d stages x %d codes x %d dims (%s)\n", c.codebooks.stages, c.codebooks.codes,
              c.codebooks.dim, quant::to_string(c.codebooks.learning));
  std::printf("parameters %zu in layers + %zu codebook values\n", tok->slab().count(),
              std::size_t(c.codebooks.stages) * c.codebooks.codes * c.codebooks.dim);
  std::printf("code rate  %.2f frames/s\n\n| depth | bit/s | kbps |\n|---|---|---|\n", c.code_rate());
  const double bits = std::log2(double(c.codebooks.codes));
  for (int d = 1; d <= c.codebooks.stages; ++d)
    std::printf("| %d | %.0f | %.3f |\n", d, c.code_rate() * d * bits, c.code_rate() * d * bits / 1000);
  std::printf("\nconfig:\n%s", info.config_yaml.c_str());
  return 0;
}

}  // namespace

Run register_inspect(CLI::App& app) {
  auto path = std::make_shared<std::string>();
  CLI::App* cmd = app.add_subcommand("inspect", "print a model's architecture, size, bitrates and config");
  cmd->add_option("model", *path, "model.safetensors")->required();
  return [path] { return run_inspect(*path); };
}

}  // namespace tessera::cli
