// checkpoint.cpp — model file layout.
#include "quant/checkpoint.h"

#include <algorithm>
#include <cmath>
#include <cstdio>

#include "audio/error.h"
#include "quant/safetensors.h"

namespace tessera::quant {
namespace {

Shape to_shape(const std::vector<int>& v) { return Shape(v.begin(), v.end()); }

// A lower bound on the floats a model of `cfg` stores: the weights of the layers the
// encoder and decoder always have (quant/encoder.cpp, quant/decoder.cpp; biases left out),
// the codebooks and the band statistics. Checked against the file before anything is
// allocated, so that a small file whose stored config names a huge model is refused
// instead of allocating gigabytes. In double: the sizes may exceed 64-bit integers.
double min_model_floats(const ExperimentConfig& cfg) {
  const ModelConfig& m = cfg.model;
  const double C = m.channels, M = m.n_mels, D = m.latent_dim;
  const double per_stage = double(m.dilations.size()) * C * C * (m.residual_kernel + 1);   // conv_dil + conv_1x1
  double n = 0;
  for (int s : m.strides) n += 2 * (per_stage + C * C * ModelConfig::stage_kernel(s));   // down / up
  n += C * M * m.kernel_in + D * C * m.kernel_out;                                      // encoder in, out
  n += C * D * m.kernel_in + M * C * m.decoder_kernel_out;                              // decoder in, out
  n += double(cfg.codebooks.stages) * cfg.codebooks.codes * cfg.codebooks.dim + 2 * M;
  return n;
}

}  // namespace

void add_model_tensors(SafetensorsWriter& w, const Tokenizer& tok, const std::string& prefix) {
  const ExperimentConfig& cfg = tok.config();
  for (const ParamEntry& e : tok.slab().entries())
    w.add<float>(prefix + e.name, to_shape(e.shape), tok.slab().params() + e.ref.offset);
  const auto& c = cfg.codebooks;
  w.add<float>(prefix + "codebooks", {c.stages, c.codes, c.dim}, tok.codebooks().codebooks().data());
  w.add<float>(prefix + "norm.mean", {cfg.model.n_mels}, tok.stats().mean.data());
  w.add<float>(prefix + "norm.std", {cfg.model.n_mels}, tok.stats().std.data());
}

void read_model_tensors(const SafetensorsReader& r, Tokenizer& tok, const std::string& prefix) {
  const ExperimentConfig& cfg = tok.config();
  for (const ParamEntry& e : tok.slab().entries())
    r.read_into<float>(prefix + e.name, to_shape(e.shape), tok.slab().params() + e.ref.offset);
  const auto& c = cfg.codebooks;
  r.read_into<float>(prefix + "codebooks", {c.stages, c.codes, c.dim}, tok.codebooks().codebooks().data());
  tok.codebooks().reset_ema();
  r.read_into<float>(prefix + "norm.mean", {cfg.model.n_mels}, tok.stats().mean.data());
  r.read_into<float>(prefix + "norm.std", {cfg.model.n_mels}, tok.stats().std.data());
  for (float v : tok.stats().std)
    if (!(v > 0) || !std::isfinite(v))
      throw Error(r.path() + ": tensor '" + prefix + "norm.std' holds a non-positive or non-finite value");
}

std::string model_id_of(const Tokenizer& tok) {
  SafetensorsWriter w;
  add_model_tensors(w, tok, "");
  return w.content_id();
}

std::string save_model(const Tokenizer& tok, const std::string& path, std::int64_t step) {
  const ExperimentConfig& cfg = tok.config();
  SafetensorsWriter w;
  add_model_tensors(w, tok, "");
  const std::string id = w.content_id();
  char rate[32];
  std::snprintf(rate, sizeof rate, "%.6g", cfg.code_rate());
  w.set_metadata("format", kModelFormat);
  w.set_metadata("format_version", std::to_string(kModelFormatVersion));
  w.set_metadata("model_id", id);
  w.set_metadata("step", std::to_string(step));
  w.set_metadata("code_rate", rate);
  w.set_metadata("config", resolved_yaml(cfg));
  w.write(path);
  return id;
}

std::unique_ptr<Tokenizer> load_model(const std::string& path, int threads, ModelInfo* info) {
  return load_model(SafetensorsReader(path), threads, info);
}

std::unique_ptr<Tokenizer> load_model(const SafetensorsReader& r, int threads, ModelInfo* info) {
  const std::string& path = r.path();
  const auto& meta = r.metadata();
  auto it = meta.find("format");
  if (it == meta.end() || it->second != kModelFormat)
    throw Error(path + ": not a tessera model (metadata 'format' is missing or not '" + kModelFormat + "')");
  it = meta.find("format_version");
  if (it == meta.end() || it->second != std::to_string(kModelFormatVersion))
    throw Error(path + ": model format version '" + (it == meta.end() ? std::string("?") : it->second) +
                "' is not supported (this tessera reads version " + std::to_string(kModelFormatVersion) + ")");
  const std::string yaml = r.metadata_at("config");
  ExperimentConfig cfg;
  try {
    cfg = parse_experiment(yaml, path + " [config]");
  } catch (const Error& e) {
    throw Error(std::string("the config stored in the model is invalid: ") + e.what());
  }
  std::uint64_t stored = 0;
  for (const TensorInfo& t : r.tensors()) stored += t.end - t.begin;
  if (min_model_floats(cfg) * sizeof(float) > double(stored))
    throw Error(path + ": the stored config describes a model of at least " +
                std::to_string(std::uint64_t(std::min(min_model_floats(cfg), 1e19))) +
                " parameters; the file holds " + std::to_string(stored) + " bytes of tensors");
  auto tok = std::make_unique<Tokenizer>(cfg, threads);
  read_model_tensors(r, *tok, "");
  const std::size_t expected = tok->slab().entries().size() + 3;
  if (r.tensors().size() != expected)
    throw Error(path + ": holds " + std::to_string(r.tensors().size()) + " tensors; the stored config needs " +
                std::to_string(expected));
  const std::string id = r.content_id();
  if (meta.count("model_id") && r.metadata_at("model_id") != id)
    throw Error(path + ": the weights do not match the stored model id (file damaged or edited)");
  if (info) {
    info->model_id = id;
    info->config_yaml = yaml;
    try {
      info->step = std::stoll(meta.count("step") ? r.metadata_at("step") : std::string("0"));
    } catch (const std::exception&) {
      throw Error(path + ": metadata 'step' is not a number");
    }
  }
  return tok;
}

}  // namespace tessera::quant
