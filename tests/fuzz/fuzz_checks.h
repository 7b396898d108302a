// fuzz_checks.h — one check per parser of outside data, shared by the libFuzzer targets
// (tests/fuzz/<name>_fuzz.cpp) and the regression test that replays saved inputs
// (tests/fuzz_regressions_test.cpp). Each check feeds `bytes` to the parser the way a file
// would arrive and returns when the input is accepted or refused with tessera::Error; any
// other exception escapes, and a broken contract (stated beside each check) aborts.
#pragma once
#include <cstddef>
#include <cstdint>
#include <string_view>

namespace tessera::fuzz {

// .npy token reader (quant/npy.h): an accepted file holds exactly rows x cols int16.
void check_npy(std::string_view bytes);
// safetensors reader (quant/safetensors.h): accepted tensors lie inside the data and tile
// it, so every accessor is safe on them.
void check_safetensors(std::string_view bytes);
// model loader (quant/checkpoint.h) on top of the safetensors reader: metadata, the stored
// YAML config, tensor names, shapes and values.
void check_model(std::string_view bytes);
// YAML experiment loader (audio/config_document.h, quant/experiment_config.h): an accepted
// config's resolved YAML reads back to the same resolved YAML (model files rely on it).
void check_config(std::string_view bytes);
// token manifest reader (quant/token_manifest.h), lenient and strict: accepted entries stay
// inside the folder and survive to_json_line -> parse unchanged; the modes agree.
void check_manifest(std::string_view bytes);
// audio loading (audio/audio_io.h) through libsndfile's virtual I/O: loaded audio is
// non-empty and finite. (libsndfile itself is not instrumented: this tests tessera's use
// of it, not its internals.)
void check_audio(std::string_view bytes);

struct Target {
  const char* name;   // tests/fuzz/<name>_fuzz.cpp, tests/fuzz/regressions/<name>/
  void (*check)(std::string_view);
};
inline constexpr Target kTargets[] = {{"npy", check_npy},           {"safetensors", check_safetensors},
                                      {"model", check_model},       {"config", check_config},
                                      {"manifest", check_manifest}, {"audio", check_audio}};

inline std::string_view as_bytes(const std::uint8_t* data, std::size_t size) {
  return {reinterpret_cast<const char*>(data), size};
}

}  // namespace tessera::fuzz
