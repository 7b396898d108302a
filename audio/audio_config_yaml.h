// audio_config_yaml.h — the `audio:` section: YAML → AudioConfig (validated) and back.
#pragma once
#include <yaml-cpp/yaml.h>

#include "audio/audio_config.h"
#include "audio/config_document.h"

namespace tessera::audio {

// Reads every key of the section (defaults for those left out), checks ranges and the
// relations between keys (win_length ≤ n_fft, hop ≤ win_length, f_max ≤ Nyquist, mel
// bands ≤ FFT bins); throws tessera::Error naming file, line and key.
AudioConfig read_audio_config(ConfigSection& section);

// Every field, in a stable order, for the resolved config stored with results.
YAML::Node to_yaml(const AudioConfig& cfg);

}  // namespace tessera::audio
