// experiment_config.cpp — keys, ranges and cross-checks of model:, codebooks:, train:.
#include "quant/experiment_config.h"

#include <cmath>
#include <thread>
#include <utility>

#include <yaml-cpp/yaml.h>

#include "audio/audio_config_yaml.h"
#include "audio/error.h"

namespace tessera::quant {
namespace {

ModelConfig read_model(ConfigSection& s, int n_mels) {
  ModelConfig m;
  m.n_mels = n_mels;
  s.get_int("channels", m.channels, 1, 4096);
  s.get_int("latent_dim", m.latent_dim, 1, 4096);
  s.get("strides", m.strides);
  s.get("dilations", m.dilations);
  s.get_int("residual_kernel", m.residual_kernel, 1, 63);
  s.get_int("kernel_in", m.kernel_in, 1, 63);
  s.get_int("kernel_out", m.kernel_out, 1, 63);
  s.get_int("decoder_kernel_out", m.decoder_kernel_out, 1, 63);
  s.finish();
  for (int st : m.strides)
    if (st < 2 || st % 2 != 0 || st > 16) s.fail("strides", "expected even strides from 2 to 16, got " + std::to_string(st));
  if (m.strides.size() > 6) s.fail("strides", "at most 6 resampling stages");
  for (int d : m.dilations)
    if (d < 1 || d > 1024) s.fail("dilations", "expected dilations from 1 to 1024, got " + std::to_string(d));
  if (m.dilations.size() > 16) s.fail("dilations", "at most 16 residual units per stage");
  const std::pair<const char*, int> kernels[] = {{"residual_kernel", m.residual_kernel},
                                                 {"kernel_in", m.kernel_in},
                                                 {"kernel_out", m.kernel_out},
                                                 {"decoder_kernel_out", m.decoder_kernel_out}};
  for (const auto& [key, k] : kernels)
    if (k % 2 == 0) s.fail(key, "expected an odd kernel size (same padding), got " + std::to_string(k));
  return m;
}

CodebookConfig read_codebooks(ConfigSection& s, int dim) {
  CodebookConfig c;
  c.dim = dim;
  s.get_int("stages", c.stages, 1, 32);
  s.get_int("codes", c.codes, 2, 32768);  // token files hold int16
  s.get_double("commitment", c.commitment, 0.0, 100.0);
  s.get_enum("learning", c.learning, {{"ema", CodebookConfig::Learning::ema}, {"loss", CodebookConfig::Learning::loss}});
  s.get_double("ema_decay", c.ema_decay, 0.0, 0.99999);
  s.get_double("ema_epsilon", c.ema_epsilon, 1e-12, 1.0);
  s.get_int("kmeans_init_batches", c.kmeans_init_batches, 1, 10000);
  s.get_int("kmeans_init_vectors", c.kmeans_init_vectors, 2, 10000000);
  s.get_int("kmeans_iters", c.kmeans_iters, 0, 1000);
  s.get_int("dead_after_steps", c.dead_after_steps, 0, 1000000);
  s.get_int("restart_pool", c.restart_pool, 1, 1000000);
  s.get_int("restart_pool_per_step", c.restart_pool_per_step, 1, 1000000);
  s.get_enum("depth_schedule", c.schedule,
             {{"uniform", CodebookConfig::DepthSchedule::uniform},
              {"full_or_uniform", CodebookConfig::DepthSchedule::full_or_uniform}});
  s.get_double("p_full", c.p_full, 0.0, 1.0);
  s.finish();
  if (c.kmeans_init_vectors < c.codes)
    s.fail("kmeans_init_vectors", "needs at least as many vectors as codes (" + std::to_string(c.codes) + ")");
  return c;
}

TrainConfig read_train(ConfigSection& s) {
  TrainConfig t;
  s.get("corpus", t.corpus);
  s.get_double("validation_share", t.validation_share, 0.0, 0.9);
  s.get_int("segment_frames", t.segment_frames, 8, 100000);
  s.get_int("batch_size", t.batch_size, 1, 4096);
  s.get_int("steps", t.steps, 1, 100000000);
  s.get_double("learning_rate", t.learning_rate, 1e-9, 10.0);
  s.get_int("warmup_steps", t.warmup_steps, 0, 100000000);
  s.get_double("min_lr_ratio", t.min_lr_ratio, 0.0, 1.0);
  s.get_double("weight_decay", t.weight_decay, 0.0, 10.0);
  s.get_double("beta1", t.beta1, 0.0, 0.999999);
  s.get_double("beta2", t.beta2, 0.0, 0.999999999);
  s.get_double("adam_epsilon", t.adam_epsilon, 1e-30, 1.0);
  s.get_double("grad_clip", t.grad_clip, 0.0, 1e9);
  s.get_double("l1_weight", t.l1_weight, 0.0, 1000.0);
  s.get_double("l2_weight", t.l2_weight, 0.0, 1000.0);
  s.get_int("threads", t.threads, 0, 1024);
  s.get_int("seed", t.seed, 0, 2147483647);
  s.get_int("log_every", t.log_every, 1, 1000000);
  s.get_int("validate_every", t.validate_every, 1, 100000000);
  s.get_int("validation_segments", t.validation_segments, 1, 100000);
  s.get_int("checkpoint_every", t.checkpoint_every, 1, 100000000);
  s.finish();
  if (t.warmup_steps > t.steps) s.fail("warmup_steps", "cannot exceed train.steps (" + std::to_string(t.steps) + ")");
  if (t.l1_weight == 0 && t.l2_weight == 0) s.fail("l2_weight", "l1_weight and l2_weight cannot both be 0");
  return t;
}

}  // namespace

ExperimentConfig read_experiment(ConfigDocument& doc) {
  doc.check_sections({"audio", "model", "codebooks", "train"});
  ExperimentConfig e;
  ConfigSection a = doc.section("audio");
  e.audio = audio::read_audio_config(a);
  ConfigSection m = doc.section("model");
  e.model = read_model(m, e.audio.n_mels);
  ConfigSection c = doc.section("codebooks");
  e.codebooks = read_codebooks(c, e.model.latent_dim);
  ConfigSection t = doc.section("train");
  e.train = read_train(t);
  // Segments must survive the encoder's down-sampling with whole code frames.
  if (e.train.segment_frames % e.model.hop() != 0)
    t.fail("segment_frames", "must be a multiple of the model's hop (" + std::to_string(e.model.hop()) + " frames)");
  const double bits = double(e.codebooks.stages) * std::log2(double(e.codebooks.codes));
  if (bits > 320) c.fail("stages", "stages x log2(codes) = " + std::to_string(int(bits)) + " bits per code frame is absurd (at most 320)");
  e.codebooks.seed = std::uint64_t(e.train.seed) * 0x9E3779B97F4A7C15ull + 17;
  e.codebooks.threads = e.train.threads;
  e.model.validate();
  return e;
}

ExperimentConfig load_experiment(const std::string& path, const std::vector<std::string>& overrides) {
  ConfigDocument doc = path.empty() ? ConfigDocument::empty() : ConfigDocument::load(path);
  for (const auto& o : overrides) doc.apply_override(o);
  return read_experiment(doc);
}

ExperimentConfig parse_experiment(const std::string& yaml, const std::string& origin) {
  ConfigDocument doc = ConfigDocument::parse(yaml, origin);
  return read_experiment(doc);
}

std::string resolved_yaml(const ExperimentConfig& e) {
  YAML::Node root(YAML::NodeType::Map);
  root["audio"] = audio::to_yaml(e.audio);
  YAML::Node m(YAML::NodeType::Map);
  m["channels"] = e.model.channels;
  m["latent_dim"] = e.model.latent_dim;
  m["strides"] = e.model.strides;
  m["strides"].SetStyle(YAML::EmitterStyle::Flow);
  m["dilations"] = e.model.dilations;
  m["dilations"].SetStyle(YAML::EmitterStyle::Flow);
  m["residual_kernel"] = e.model.residual_kernel;
  m["kernel_in"] = e.model.kernel_in;
  m["kernel_out"] = e.model.kernel_out;
  m["decoder_kernel_out"] = e.model.decoder_kernel_out;
  root["model"] = m;
  const CodebookConfig& c = e.codebooks;
  YAML::Node cb(YAML::NodeType::Map);
  cb["stages"] = c.stages;
  cb["codes"] = c.codes;
  cb["commitment"] = c.commitment;
  cb["learning"] = to_string(c.learning);
  cb["ema_decay"] = c.ema_decay;
  cb["ema_epsilon"] = c.ema_epsilon;
  cb["kmeans_init_batches"] = c.kmeans_init_batches;
  cb["kmeans_init_vectors"] = c.kmeans_init_vectors;
  cb["kmeans_iters"] = c.kmeans_iters;
  cb["dead_after_steps"] = c.dead_after_steps;
  cb["restart_pool"] = c.restart_pool;
  cb["restart_pool_per_step"] = c.restart_pool_per_step;
  cb["depth_schedule"] = to_string(c.schedule);
  cb["p_full"] = c.p_full;
  root["codebooks"] = cb;
  const TrainConfig& t = e.train;
  YAML::Node tr(YAML::NodeType::Map);
  tr["corpus"] = t.corpus;
  tr["validation_share"] = t.validation_share;
  tr["segment_frames"] = t.segment_frames;
  tr["batch_size"] = t.batch_size;
  tr["steps"] = t.steps;
  tr["learning_rate"] = t.learning_rate;
  tr["warmup_steps"] = t.warmup_steps;
  tr["min_lr_ratio"] = t.min_lr_ratio;
  tr["weight_decay"] = t.weight_decay;
  tr["beta1"] = t.beta1;
  tr["beta2"] = t.beta2;
  tr["adam_epsilon"] = t.adam_epsilon;
  tr["grad_clip"] = t.grad_clip;
  tr["l1_weight"] = t.l1_weight;
  tr["l2_weight"] = t.l2_weight;
  tr["threads"] = t.threads;
  tr["seed"] = t.seed;
  tr["log_every"] = t.log_every;
  tr["validate_every"] = t.validate_every;
  tr["validation_segments"] = t.validation_segments;
  tr["checkpoint_every"] = t.checkpoint_every;
  root["train"] = tr;
  return emit_yaml(root);
}

}  // namespace tessera::quant
