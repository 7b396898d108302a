// trainer.cpp — the training loop, validation, checkpoints and resume.
#include "quant/trainer.h"

#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <sstream>

#include <nlohmann/json.hpp>

#include "audio/append_file.h"
#include "audio/atomic_file.h"
#include "audio/error.h"
#include "quant/checkpoint.h"
#include "quant/safetensors.h"

namespace tessera::quant {
namespace fs = std::filesystem;
namespace {

constexpr const char* kStateFormat = "tessera-train-state";
constexpr int kStateVersion = 2;   // 2: self-contained (the model's tensors under "model/")
constexpr const char* kStateModelPrefix = "model/";

std::string rng_text(const std::mt19937_64& rng) {
  std::ostringstream s;
  s << rng;
  return s.str();
}

void rng_from_text(std::mt19937_64& rng, const std::string& text, const std::string& origin) {
  std::istringstream s(text);
  s >> rng;
  if (s.fail()) throw Error(origin + ": damaged random-generator state");
}

// The running sums of a metrics window as text, exactly: hexadecimal floats round-trip
// every bit of a double.
std::string window_text(double loss, double recon, double commitment, std::int64_t steps) {
  char buf[160];
  std::snprintf(buf, sizeof buf, "%a %a %a %lld", loss, recon, commitment, static_cast<long long>(steps));
  return buf;
}

void window_from_text(const std::string& text, double& loss, double& recon, double& commitment, std::int64_t& steps,
                      const std::string& origin) {
  const char* p = text.c_str();
  char* end = nullptr;
  double* sums[] = {&loss, &recon, &commitment};
  for (double* v : sums) {
    *v = std::strtod(p, &end);
    if (end == p || !std::isfinite(*v)) throw Error(origin + ": damaged metrics window '" + text + "'");
    p = end;
  }
  const long long n = std::strtoll(p, &end, 10);
  if (end == p || *end != '\0' || n < 0) throw Error(origin + ": damaged metrics window '" + text + "'");
  steps = n;
}

// The architecture part of a config (everything but train:), to check a resume.
std::string architecture_of(ExperimentConfig c) {
  c.train = TrainConfig{};
  return resolved_yaml(c);
}

std::int64_t parse_int(const SafetensorsReader& r, const char* key) {
  try {
    return std::stoll(r.metadata_at(key));
  } catch (const Error&) {
    throw;
  } catch (const std::exception&) {
    throw Error(r.path() + ": metadata '" + key + "' is not a number");
  }
}

}  // namespace

Trainer::Trainer(const ExperimentConfig& cfg, std::string run_dir,
                 const std::function<void(std::size_t, std::size_t)>& load_progress)
    : cfg_(cfg),
      dir_(std::move(run_dir)),
      schedule_(cfg.train.learning_rate, cfg.train.warmup_steps, cfg.train.steps,
                cfg.train.learning_rate * cfg.train.min_lr_ratio),
      rng_(std::uint64_t(cfg.train.seed)) {
  const TrainConfig& t = cfg_.train;
  if (t.corpus.empty()) throw Error("train.corpus: no corpus given (a folder or a list file of audio)");
  corpus_ = load_corpus(t.corpus, cfg_.audio, t.validation_share, cfg_.model.hop() * 4,
                        resolve_threads(t.threads), nullptr, load_progress);
  const int L = t.segment_frames / cfg_.model.hop();
  tok_ = std::make_unique<Tokenizer>(cfg_, t.threads, t.batch_size * L);
  tok_->init(std::uint64_t(t.seed));
  tok_->stats() = band_stats(corpus_.train);
  step_fn_ = std::make_unique<TrainStep>(*tok_, t);
  train_sampler_ = std::make_unique<SegmentSampler>(corpus_.train, t.segment_frames);
  val_sampler_ = std::make_unique<SegmentSampler>(corpus_.validation.empty() ? corpus_.train : corpus_.validation,
                                                  t.segment_frames);
}

Trainer::~Trainer() = default;

std::string Trainer::model_path() const { return (fs::path(dir_) / "model.safetensors").string(); }
std::string Trainer::state_path() const { return (fs::path(dir_) / "train-state.safetensors").string(); }
std::string Trainer::metrics_path() const { return (fs::path(dir_) / "metrics.jsonl").string(); }

void Trainer::draw_batch() {
  const int B = cfg_.train.batch_size, M = cfg_.model.n_mels, T = cfg_.train.segment_frames;
  x_.resize(B, M, T);
  for (int b = 0; b < B; ++b) train_sampler_->draw(rng_, tok_->stats(), x_.frame(b, 0));
}

void Trainer::kmeans_init() {
  std::vector<Eigen::MatrixXf> batches;
  for (int i = 0; i < cfg_.codebooks.kmeans_init_batches; ++i) {
    draw_batch();
    tok_->encoder().forward(x_, z_, tok_->slab(), /*train=*/false);
    batches.emplace_back(z_.all());
  }
  tok_->codebooks().init_from(std::span<const Eigen::MatrixXf>(batches));
}

ValidationReport Trainer::validate() {
  Tokenizer& m = *tok_;
  ResidualCodebooks& rvq = m.codebooks();
  const int S = cfg_.codebooks.stages, B = cfg_.train.batch_size, M = cfg_.model.n_mels;
  const int T = cfg_.train.segment_frames, count = cfg_.train.validation_segments;
  ValidationReport v;
  v.mel_l1.assign(S, 0.0);
  double loss_sum = 0, elements = 0;
  Tensor x, z, zq, y;
  for (int first = 0; first < count; first += B) {
    const int nb = std::min(B, count - first);
    x.resize(nb, M, T);
    for (int b = 0; b < nb; ++b) val_sampler_->fixed(std::size_t(first + b), std::size_t(count), m.stats(), x.frame(b, 0));
    m.encoder().forward(x, z, m.slab(), /*train=*/false);
    zq.resize(z.B(), z.C(), z.T());
    for (int d = 1; d <= S; ++d) {
      rvq.forward(z.all(), d, zq.all(), ResidualCodebooks::Pass::eval);
      m.decoder().forward(zq, y, m.slab(), /*train=*/false);
      const auto e = (y.all() - x.all()).array();
      // Back to natural-log units: the normalised error times each band's std.
      v.mel_l1[d - 1] += (e.abs().colwise() * m.stats().std.array()).sum();
      if (d == S) loss_sum += cfg_.train.l1_weight * e.abs().sum() + cfg_.train.l2_weight * e.square().sum();
    }
    elements += double(x.size());
  }
  for (double& l : v.mel_l1) l /= elements;
  v.loss = loss_sum / elements;
  last_val_loss_ = v.loss;
  last_val_l1_ = v.mel_l1.back();
  return v;
}

void Trainer::log_metrics(const StepReport& r) {
  nlohmann::json j = {{"step", r.step},          {"loss", r.loss},   {"recon", r.recon},
                      {"commitment", r.commitment}, {"lr", r.lr},    {"grad_norm", r.grad_norm},
                      {"depth", r.depth},        {"steps_per_s", r.steps_per_s}};
  std::vector<double> ppl;
  std::vector<int> used;
  for (int s = 0; s < cfg_.codebooks.stages; ++s) {
    const StageUsage u = tok_->codebooks().usage().stage(s);
    ppl.push_back(u.perplexity);
    used.push_back(u.used);
  }
  j["perplexity"] = ppl;
  j["codes_used"] = used;
  append_line_to_file(metrics_path(), j.dump());
}

void Trainer::log_validation(const ValidationReport& v) {
  nlohmann::json j = {{"step", step_}, {"validation", {{"loss", v.loss}, {"mel_l1_by_depth", v.mel_l1}}}};
  append_line_to_file(metrics_path(), j.dump());
}

void Trainer::run(const std::atomic<bool>* stop, const std::function<void(const StepReport&)>& on_step) {
  const TrainConfig& t = cfg_.train;
  fs::create_directories(dir_);
  write_file_atomic((fs::path(dir_) / "config.yaml").string(), resolved_yaml(cfg_));
  if (step_ == 0) {
    write_file_atomic(metrics_path(), "");
    kmeans_init();
  }
  const auto t0 = std::chrono::steady_clock::now();
  const std::int64_t first = step_;
  StepReport r;
  r.total = t.steps;
  while (step_ < t.steps) {
    if (stop && stop->load()) break;
    draw_batch();
    const int depth = draw_depth(cfg_.codebooks, rng_);
    const double lr = schedule_.at(step_);
    StepResult sr;
    try {
      sr = step_fn_->run(x_, depth, lr);
    } catch (const Error& e) {
      throw Error("step " + std::to_string(step_ + 1) + ": " + e.what());
    }
    ++step_;
    window_.loss += sr.loss, window_.recon += sr.recon, window_.commitment += sr.commitment, ++window_.steps;

    const double elapsed = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
    r.step = step_;
    r.loss = sr.loss, r.recon = sr.recon, r.commitment = sr.commitment, r.grad_norm = sr.grad_norm;
    r.lr = lr, r.depth = depth;
    r.steps_per_s = elapsed > 0 ? double(step_ - first) / elapsed : 0;
    r.audio_s_per_s = r.steps_per_s * t.batch_size * t.segment_frames / cfg_.audio.frame_rate();
    r.eta_s = r.steps_per_s > 0 ? double(t.steps - step_) / r.steps_per_s : 0;
    if (step_ % t.log_every == 0 || step_ == t.steps) {
      StepReport mean = r;
      const double n = double(window_.steps);
      mean.loss = window_.loss / n, mean.recon = window_.recon / n, mean.commitment = window_.commitment / n;
      log_metrics(mean);
      r.codes_used.clear();
      for (int s = 0; s < cfg_.codebooks.stages; ++s) r.codes_used.push_back(tok_->codebooks().usage().stage(s).used);
      tok_->codebooks().reset_usage();
      window_ = LogWindow{};
    }
    if (step_ % t.validate_every == 0 || step_ == t.steps) {
      log_validation(validate());
    }
    r.validation_loss = last_val_loss_;
    r.validation_mel_l1 = last_val_l1_;
    if (step_ % t.checkpoint_every == 0 || step_ == t.steps) checkpoint();
    if (on_step) on_step(r);
  }
  if (step_ < t.steps) checkpoint();  // stopped early: keep what was done
}

// A checkpoint is committed by one rename: the state file holds everything a resume needs
// (weights, codebooks and statistics under "model/", the optimiser, the generators) and
// the id of the model it belongs to. It is written first; model.safetensors follows. A
// run killed between the two leaves an older model file, which resume() rewrites.
void Trainer::checkpoint() {
  fs::create_directories(dir_);
  ResidualCodebooks& rvq = tok_->codebooks();
  const CodebookConfig& c = cfg_.codebooks;
  SafetensorsWriter w;
  add_model_tensors(w, *tok_, kStateModelPrefix);
  const Adam& adam = step_fn_->adam();
  const auto n = std::int64_t(adam.size());
  w.add<float>("adam.m", {n}, adam.m().data());
  w.add<float>("adam.v", {n}, adam.v().data());
  if (const Adam* ca = step_fn_->codebook_adam()) {
    const auto nc = std::int64_t(ca->size());
    w.add<float>("codebook_adam.m", {nc}, ca->m().data());
    w.add<float>("codebook_adam.v", {nc}, ca->v().data());
    w.set_metadata("codebook_adam_t", std::to_string(ca->steps()));
  }
  w.add<float>("ema.cluster_size", {c.stages, c.codes}, rvq.ema_cluster_size().data());
  w.add<float>("ema.embed_sum", {c.stages, c.codes, c.dim}, rvq.ema_embed_sum().data());
  w.add<std::int32_t>("codes.steps_since_used", {c.stages, c.codes}, rvq.steps_since_used().data());
  w.add<float>("restart.pool", {std::int64_t(rvq.restart_pool().size())}, rvq.restart_pool().data());
  w.add<std::int64_t>("restart.state", {std::int64_t(rvq.restart_pool_state().size())},
                      rvq.restart_pool_state().data());
  UsageStats& usage = rvq.usage();
  w.add<std::int64_t>("log_window.code_counts", {c.stages, c.codes}, usage.all_counts().data());
  w.add<std::int64_t>("log_window.vectors", {c.stages}, usage.all_vectors().data());
  w.set_metadata("log_window", window_text(window_.loss, window_.recon, window_.commitment, window_.steps));
  w.set_metadata("format", kStateFormat);
  w.set_metadata("format_version", std::to_string(kStateVersion));
  w.set_metadata("config", resolved_yaml(cfg_));
  w.set_metadata("model_id", model_id_of(*tok_));
  w.set_metadata("step", std::to_string(step_));
  w.set_metadata("adam_t", std::to_string(adam.steps()));
  w.set_metadata("rng", rng_text(rng_));
  w.set_metadata("codebook_rng", rng_text(rvq.rng()));
  w.set_metadata("validation_loss", std::to_string(last_val_loss_));
  w.set_metadata("validation_mel_l1", std::to_string(last_val_l1_));
  w.write(state_path());
  save_model(*tok_, model_path(), step_);
}

ResumeReport Trainer::resume() {
  if (!fs::exists(state_path()))
    throw Error("cannot resume: '" + dir_ + "' holds no train-state.safetensors (no checkpoint was completed; " +
                "train again without --resume)");
  SafetensorsReader r(state_path());
  if (!r.metadata().count("format") || r.metadata_at("format") != kStateFormat)
    throw Error(state_path() + ": not a tessera training state");
  if (r.metadata_at("format_version") != std::to_string(kStateVersion))
    throw Error(state_path() + ": unsupported training-state version '" + r.metadata_at("format_version") +
                "' (this tessera resumes version " + std::to_string(kStateVersion) + ")");
  ExperimentConfig stored;
  try {
    stored = parse_experiment(r.metadata_at("config"), state_path() + " [config]");
  } catch (const Error& e) {
    throw Error(std::string("the config stored in the training state is invalid: ") + e.what());
  }
  if (architecture_of(stored) != architecture_of(cfg_))
    throw Error("cannot resume: the audio:, model: or codebooks: settings differ from those of '" + state_path() +
                "' (only train: settings may change on resume)");
  // Weights, codebooks and statistics go into the model built for this run's config.
  ResidualCodebooks& rvq = tok_->codebooks();
  const CodebookConfig& c = cfg_.codebooks;
  read_model_tensors(r, *tok_, kStateModelPrefix);
  const std::string id = model_id_of(*tok_);
  if (r.metadata_at("model_id") != id)
    throw Error(state_path() + ": the weights do not match the stored model id (file damaged or edited)");
  const auto n = std::int64_t(tok_->slab().count());
  step_fn_->adam().restore(parse_int(r, "adam_t"), r.get<float>("adam.m", {n}), r.get<float>("adam.v", {n}));
  if (Adam* ca = step_fn_->codebook_adam()) {
    const auto nc = std::int64_t(rvq.codebooks().size());
    ca->restore(parse_int(r, "codebook_adam_t"), r.get<float>("codebook_adam.m", {nc}),
                            r.get<float>("codebook_adam.v", {nc}));
  }
  r.read_into<float>("ema.cluster_size", {c.stages, c.codes}, rvq.ema_cluster_size().data());
  r.read_into<float>("ema.embed_sum", {c.stages, c.codes, c.dim}, rvq.ema_embed_sum().data());
  r.read_into<std::int32_t>("codes.steps_since_used", {c.stages, c.codes}, rvq.steps_since_used().data());
  r.read_into<float>("restart.pool", {std::int64_t(rvq.restart_pool().size())}, rvq.restart_pool().data());
  r.read_into<std::int64_t>("restart.state", {std::int64_t(rvq.restart_pool_state().size())},
                            rvq.restart_pool_state().data());
  rng_from_text(rng_, r.metadata_at("rng"), state_path());
  rng_from_text(rvq.rng(), r.metadata_at("codebook_rng"), state_path());
  step_ = parse_int(r, "step");
  last_val_loss_ = std::stod(r.metadata_at("validation_loss"));
  last_val_l1_ = std::stod(r.metadata_at("validation_mel_l1"));
  // States written before the log window was saved resume with an empty window: their first
  // metrics line then averages only the steps after the checkpoint.
  window_ = LogWindow{};
  rvq.reset_usage();
  if (r.metadata().count("log_window")) {
    window_from_text(r.metadata_at("log_window"), window_.loss, window_.recon, window_.commitment, window_.steps,
                     state_path());
    UsageStats& usage = rvq.usage();
    r.read_into<std::int64_t>("log_window.code_counts", {c.stages, c.codes}, usage.all_counts().data());
    r.read_into<std::int64_t>("log_window.vectors", {c.stages}, usage.all_vectors().data());
    for (int s = 0; s < c.stages; ++s) {  // each stage's counts must add up to its vectors
      std::int64_t sum = 0;
      for (std::int64_t n : usage.counts(s)) sum = n < 0 || sum < 0 ? -1 : sum + n;
      if (sum != usage.all_vectors()[std::size_t(s)])
        throw Error(state_path() + ": damaged code counts of stage " + std::to_string(s + 1));
    }
  }

  ResumeReport rep;
  // The model file of this checkpoint is missing or older when a run was killed between
  // the two writes of checkpoint(); it is rebuilt from the state.
  ModelInfo info;
  try {
    load_model(model_path(), 1, &info);
  } catch (const Error&) {
  }
  if (info.model_id != id || info.step != step_) {
    save_model(*tok_, model_path(), step_);
    rep.model_rewritten = true;
  }
  // Keep the metrics of the steps that the checkpoint covers; later lines (and a line cut
  // short by the kill) are dropped, and those steps are logged again.
  std::ifstream in(metrics_path());
  std::string line, kept;
  while (std::getline(in, line)) {
    const auto j = nlohmann::json::parse(line, nullptr, /*allow_exceptions=*/false);
    if (j.is_object() && j.contains("step") && j["step"].is_number_integer() && j["step"].get<std::int64_t>() <= step_)
      kept += line + "\n";
    else
      ++rep.metrics_lines_dropped;
  }
  write_file_atomic(metrics_path(), kept);
  return rep;
}

}  // namespace tessera::quant
