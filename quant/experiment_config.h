// experiment_config.h — one YAML experiment file: audio:, model:, codebooks:, train:,
// typed and validated, with --set overrides, and its resolved form (every setting,
// defaults included) for the run folder and the model file.
#pragma once
#include <string>
#include <vector>

#include "audio/audio_config.h"
#include "audio/config_document.h"
#include "quant/codebook/codebook_config.h"
#include "quant/model_config.h"
#include "quant/train_config.h"

namespace tessera::quant {

struct ExperimentConfig {
  audio::AudioConfig audio;
  ModelConfig model;          // model.n_mels follows audio.n_mels
  CodebookConfig codebooks;   // codebooks.dim follows model.latent_dim; seed and threads follow train
  TrainConfig train;

  double code_rate() const { return audio.frame_rate() / model.hop(); }  // code frames per second
};

// Reads and checks every section; throws tessera::Error naming file, line and key.
ExperimentConfig read_experiment(ConfigDocument& doc);
// `path` empty means the built-in defaults; overrides are "section.key=value".
ExperimentConfig load_experiment(const std::string& path, const std::vector<std::string>& overrides);
// Parses the resolved YAML stored in a model file (`origin` names it in messages).
ExperimentConfig parse_experiment(const std::string& yaml, const std::string& origin);

// Every setting of every section as YAML, in a stable order.
std::string resolved_yaml(const ExperimentConfig& cfg);

}  // namespace tessera::quant
