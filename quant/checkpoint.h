// checkpoint.h — the model file (safetensors): weights by layer name, codebooks, band
// statistics, and in __metadata__ the resolved YAML, the model id (hash of the tensors),
// the training step and the code rate. Written atomically.
#pragma once
#include <cstdint>
#include <memory>
#include <string>

#include "quant/tokenizer.h"

namespace tessera::quant {

inline constexpr const char* kModelFormat = "tessera-model";
inline constexpr int kModelFormatVersion = 1;

struct ModelInfo {
  std::string model_id;      // 16 hex digits
  std::int64_t step = 0;     // training steps behind these weights
  std::string config_yaml;   // resolved experiment
};

class SafetensorsWriter;
class SafetensorsReader;

// The model's tensors (layer weights, "codebooks", "norm.mean", "norm.std") with `prefix`
// before each name: "" in the model file, "model/" in the self-contained training state.
// The writer keeps pointers into `tok`.
void add_model_tensors(SafetensorsWriter& w, const Tokenizer& tok, const std::string& prefix);
// Reads them into `tok`, whose config gives every shape; throws tessera::Error naming the
// file and tensor on a missing or misshapen tensor or a non-positive 'norm.std'.
void read_model_tensors(const SafetensorsReader& r, Tokenizer& tok, const std::string& prefix);
// The model id that save_model(tok, ...) stores (a hash of the tensors, not the metadata).
std::string model_id_of(const Tokenizer& tok);

// Writes `tok` to `path` (temporary file, fsync, rename); returns the model id.
std::string save_model(const Tokenizer& tok, const std::string& path, std::int64_t step);

// Reads a model file, checks format, version, every tensor's name, dtype and shape
// against the stored config; throws tessera::Error naming the file and the problem.
std::unique_ptr<Tokenizer> load_model(const std::string& path, int threads, ModelInfo* info = nullptr);
// The same checks over a file already read (e.g. from memory).
class SafetensorsReader;
std::unique_ptr<Tokenizer> load_model(const SafetensorsReader& r, int threads, ModelInfo* info = nullptr);

}  // namespace tessera::quant
