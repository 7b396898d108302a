// decode.cpp — `tessera decode --model MODEL TOKENS.npy -o OUT.wav [--depth d] [--iters N]`:
// codes → decoder → log-mel → mel inversion → Griffin-Lim → WAV (peak-limited), streamed.
#include <cstdio>
#include <filesystem>

#include "audio/audio_io.h"
#include "audio/chunked_synthesis.h"
#include "audio/wav_writer.h"
#include "audio/error.h"
#include "cli/command.h"
#include "cli/output_path.h"
#include "cli/progress.h"
#include "quant/checkpoint.h"
#include "quant/npy.h"
#include "quant/token_manifest.h"

namespace tessera::cli {
namespace fs = std::filesystem;
namespace {

struct DecodeArgs {
  std::string model, tokens, output;
  int depth = -1, iters = -1, jobs = 0;  // depth -1: all stages in the file
};

// The manifest line describing `tokens`, searched in its folder and the folders above.
bool find_manifest_entry(const fs::path& tokens, quant::ManifestEntry& out) {
  std::error_code ec;
  const fs::path abs = fs::weakly_canonical(tokens, ec);
  for (fs::path dir = abs.parent_path(); !dir.empty(); dir = dir.parent_path()) {
    for (const auto& e : fs::directory_iterator(dir, ec)) {
      const std::string name = e.path().filename().string();
      if (!name.starts_with("manifest") || e.path().extension() != ".jsonl") continue;
      std::vector<std::string> bad;   // damaged lines cannot vouch for a file: ignored
      for (const auto& m : quant::read_manifest(e.path().string(), &bad))
        if (fs::weakly_canonical(dir / m.tokens, ec) == abs) { out = m; return true; }
    }
    if (dir == dir.parent_path()) break;
  }
  return false;
}

int run_decode(const DecodeArgs& a) {
  check_output_path(a.output, {a.tokens, a.model});
  quant::ModelInfo info;
  auto tok = quant::load_model(a.model, a.jobs, &info);
  const quant::ExperimentConfig& cfg = tok->config();
  const quant::Int16Matrix m = quant::read_npy_i16(a.tokens);
  if (m.cols < 1 || m.rows < 1) throw Error("'" + a.tokens + "' holds no codes (shape [" + std::to_string(m.rows) +
                                          ", " + std::to_string(m.cols) + "])");
  const int depth = a.depth == -1 ? int(m.cols) : a.depth;
  if (depth < 1 || depth > m.cols)
    throw Error("--depth " + std::to_string(a.depth) + ": expected 1.." + std::to_string(m.cols) + " ('" + a.tokens +
                "' holds " + std::to_string(m.cols) + " stages)");
  if (depth > cfg.codebooks.stages)
    throw Error("'" + a.tokens + "' has depth " + std::to_string(m.cols) + " but the model has " +
                std::to_string(cfg.codebooks.stages) + " stages");
  quant::ManifestEntry entry;
  if (find_manifest_entry(a.tokens, entry) && entry.model_id != info.model_id)
    throw Error("'" + a.tokens + "' was made by model " + entry.model_id + ", not by '" + a.model + "' (" +
                info.model_id + ")");
  Eigen::MatrixXi codes(m.rows, depth);
  for (std::int64_t r = 0; r < m.rows; ++r)
    for (int c = 0; c < depth; ++c) {
      const int v = m.data[std::size_t(r * m.cols + c)];
      if (v < 0 || v >= cfg.codebooks.codes)
        throw Error("'" + a.tokens + "': code " + std::to_string(v) + " at frame " + std::to_string(r) + ", stage " +
                    std::to_string(c + 1) + " is outside 0.." + std::to_string(cfg.codebooks.codes - 1));
      codes(r, c) = v;
    }

  audio::AudioConfig acfg = cfg.audio;
  if (a.iters >= 0) acfg.griffin_lim_iters = a.iters;
  // Streamed: codes → log-mel in chunks (ChunkedDecoder) → audio in overlapping chunks
  // (ChunkedSynthesis) → WavWriter, so memory does not grow with the length.
  audio::WavWriter out(a.output, acfg.sample_rate, audio::SampleFormat::pcm16, acfg.output_peak_dbfs);
  audio::ChunkedSynthesis syn(acfg, [&](const float* x, std::size_t n) { out.write(x, n); });
  Progress bar("decode", double(codes.rows()), "code frames/s");
  double frames = 0;
  quant::ChunkedDecoder dec(*tok, depth, [&](const Eigen::Ref<const Eigen::MatrixXf>& mel) {
    syn.push(mel);
    bar.update(frames += double(mel.cols()) / tok->hop());
  });
  dec.push(codes);
  dec.finish();
  syn.finish();
  if (bar.elapsed() > 1.0) bar.finish();
  const double seconds = double(out.samples()) / acfg.sample_rate;
  const audio::SaveReport rep = out.commit();
  warn_about_level(rep, a.output);
  std::printf("decoded   %s: %lld code frames at depth %d (%.2f s) -> %s\n", a.tokens.c_str(), (long long)m.rows, depth,
              seconds, a.output.c_str());
  return 0;
}

}  // namespace

Run register_decode(CLI::App& app) {
  auto a = std::make_shared<DecodeArgs>();
  CLI::App* cmd = app.add_subcommand("decode", "turn a code file back into audio (decoder, then Griffin-Lim)");
  cmd->add_option("--model", a->model, "model.safetensors")->required()->check(CLI::ExistingFile);
  cmd->add_option("tokens", a->tokens, ".npy code file (int16 [frames, depth])")->required()->check(CLI::ExistingFile);
  cmd->add_option("-o,--output", a->output, "output WAV")->required();
  cmd->add_option("--depth", a->depth, "stages to use (default: all in the file)");
  cmd->add_option("--iters", a->iters, "Griffin-Lim iterations (default: the model's audio.griffin_lim_iters)");
  cmd->add_option("--jobs", a->jobs, "threads (default: all cores)");
  return [a] { return run_decode(*a); };
}

}  // namespace tessera::cli
