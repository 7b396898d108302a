// encode.cpp — `tessera encode --model MODEL INPUT... --out DIR`: audio → code files.
// One .npy (int16 [frames, depth]) per input mirroring the input tree, one manifest line
// each; resumable, shardable, atomic.
#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <map>
#include <set>

#include "audio/append_file.h"
#include "audio/atomic_file.h"
#include "audio/error.h"
#include "audio/file_list.h"
#include "audio/folder_lock.h"
#include "cli/command.h"
#include "cli/file_workers.h"
#include "cli/output_path.h"
#include "cli/progress.h"
#include "quant/checkpoint.h"
#include "quant/npy.h"
#include "quant/token_manifest.h"

namespace tessera::cli {
namespace fs = std::filesystem;
namespace {

struct EncodeArgs {
  std::string model, out, shard, flat;
  std::vector<std::string> inputs;
  int depth = -1, jobs = 0;  // depth -1: all the model's stages
};

void parse_shard(const std::string& s, int& index, int& count) {
  index = 0, count = 1;
  if (s.empty()) return;
  const auto slash = s.find('/');
  try {
    if (slash == std::string::npos) throw std::invalid_argument("");
    std::size_t a = 0, b = 0;
    index = std::stoi(s.substr(0, slash), &a);
    count = std::stoi(s.substr(slash + 1), &b);
    if (a != slash || b != s.size() - slash - 1) throw std::invalid_argument("");
  } catch (const std::exception&) {
    throw Error("--shard '" + s + "': expected i/n, e.g. 0/8");
  }
  // 0-based like most batch schedulers' array indices: the shards of n are 0/n ... (n-1)/n.
  if (count < 1 || index < 0 || index >= count)
    throw Error("--shard '" + s + "': expected 0 <= i < n (shards 0/n ... " + std::to_string(count - 1) + "/n)");
}

std::string tokens_path_for(const std::string& relative) {
  fs::path p(relative);
  p.replace_extension(".npy");
  return p.generic_string();
}

int run_encode(const EncodeArgs& a) {
  int shard = 0, shards = 1;
  parse_shard(a.shard, shard, shards);
  quant::ModelInfo info;
  auto tok = quant::load_model(a.model, 1, &info);
  const quant::ExperimentConfig cfg = tok->config();  // a copy: tok may be dropped below
  const int depth = a.depth == -1 ? cfg.codebooks.stages : a.depth;
  if (depth < 1 || depth > cfg.codebooks.stages)
    throw Error("--depth " + std::to_string(a.depth) + ": expected 1.." + std::to_string(cfg.codebooks.stages) +
                " (the model has " + std::to_string(cfg.codebooks.stages) + " stages)");

  std::vector<audio::InputFile> all = audio::expand_inputs(a.inputs);
  std::vector<audio::InputFile> files;
  for (std::size_t i = 0; i < all.size(); ++i)
    if (int(i % std::size_t(shards)) == shard) files.push_back(all[i]);
  // Two inputs must not land on one token file (a.wav and a.flac side by side).
  std::map<std::string, std::string> owner;
  for (const auto& f : files) {
    const std::string t = tokens_path_for(f.relative);
    if (!quant::stays_inside(t)) throw Error("'" + f.path + "': its output '" + t + "' would leave the output folder");
    auto [it, fresh] = owner.emplace(t, f.path);
    if (!fresh) throw Error("'" + f.path + "' and '" + it->second + "' would both write '" + t + "'");
  }

  std::error_code ec;
  if (fs::exists(a.out, ec) && !fs::is_directory(a.out, ec))
    throw Error("--out '" + a.out + "': it is a file, not a folder");
  const bool fresh_out = !fs::exists(a.out, ec);   // made by this run: removed if nothing lands in it
  // One writer per manifest: shards of one corpus may share the folder, a second run of
  // the same shard may not.
  const FolderLock lock(a.out, "encode",
                        shards == 1 ? ".tessera.lock"
                                    : ".tessera.shard-" + std::to_string(shard) + "-of-" + std::to_string(shards) + ".lock");
  note_lock_takeover(lock);
  // After the lock has made --out, so --flat may lie inside it; a bad --flat path still
  // leaves nothing behind (the lock removes the folder it made).
  std::unique_ptr<AtomicFile> flat;
  if (!a.flat.empty()) flat = std::make_unique<AtomicFile>(a.flat);
  const std::string manifest = (fs::path(a.out) / (shards == 1 ? std::string("manifest.jsonl")
                                                               : "manifest.shard-" + std::to_string(shard) + "-of-" +
                                                                     std::to_string(shards) + ".jsonl"))
                                   .string();
  // Temporary files of a killed run of this shard (other shards' files are left alone).
  {
    std::set<std::string> mine{manifest}, folders{a.out};
    for (const auto& f : files) {
      const fs::path p = fs::path(a.out) / tokens_path_for(f.relative);
      mine.insert(p.string());
      folders.insert(p.parent_path().string());
    }
    for (const std::string& d : folders)
      remove_stale_temporaries(d, [&](const std::string& t) { return mine.count(t) != 0; });
  }
  // Resume: keep entries whose token file is complete and made by this model at this depth.
  std::vector<std::string> bad;
  std::map<std::string, quant::ManifestEntry> done;
  for (auto& e : quant::read_manifest(manifest, &bad)) {
    // Only token paths this run would write are opened: a line naming any other path
    // (even one that stayed inside the folder) is not ours to read.
    if (e.model_id != info.model_id || e.depth != depth || !owner.count(e.tokens)) continue;
    try {
      const quant::Int16Matrix m = quant::read_npy_i16((fs::path(a.out) / e.tokens).string());
      if (m.rows == e.frames && m.cols == e.depth) done[e.tokens] = e;
    } catch (const Error&) {
    }
  }
  for (const std::string& why : bad) std::fprintf(stderr, "note: %s; line dropped\n", why.c_str());
  {
    std::string kept;
    for (const auto& f : files)
      if (auto it = done.find(tokens_path_for(f.relative)); it != done.end()) kept += quant::to_json_line(it->second) + "\n";
    write_file_atomic(manifest, kept);
  }
  AppendFile log(manifest);   // whole lines only, even when the disk fills

  const double code_rate = cfg.code_rate();
  const int K = cfg.codebooks.codes;
  // Many files: one model per core; few long files: one model using every core.
  const WorkerPlan plan = plan_workers(a.jobs, files.size() - std::min(files.size(), done.size()));
  const auto models = load_worker_models(a.model, plan, std::move(tok));
  Progress bar("encode", double(files.size()), "files/s");
  double audio_s = 0;
  std::size_t skipped = 0, n = 0;
  auto status = [&] {
    char extra[128];
    const double wall = bar.elapsed();
    std::snprintf(extra, sizeof extra, "  %.2f h audio  %.0fx real time", audio_s / 3600, wall > 0 ? audio_s / wall : 0);
    return std::string(extra);
  };
  const double* norm = cfg.audio.normalize_input ? &cfg.audio.normalize_dbfs : nullptr;
  struct Result {
    Eigen::MatrixXi codes;
    double duration = 0;
    bool skipped = false;
    std::vector<std::string> warnings;  // odd but usable input (cli/output_path.h)
    std::string error;  // a bad or too-short file is reported and skipped, not fatal
  };
  std::vector<std::string> failed;
  std::vector<Result> results(files.size());
  run_file_workers(
      files.size(), plan.workers,
      [&](std::size_t i, int w) {
        const auto& f = files[i];
        const std::string rel = tokens_path_for(f.relative);
        const fs::path out = fs::path(a.out) / rel;
        Result& r = results[i];
        if (done.count(rel)) {
          r.skipped = true;
          if (flat) {
            const quant::Int16Matrix m = quant::read_npy_i16(out.string());
            r.codes.resize(m.rows, m.cols);
            for (std::int64_t y = 0; y < m.rows; ++y)
              for (std::int64_t c = 0; c < m.cols; ++c) r.codes(y, c) = m.data[std::size_t(y * m.cols + c)];
          }
          return;
        }
        try {
          // Streamed: memory does not grow with the file (tokenizer.h: encode_file).
          audio::SourceInfo src;
          r.codes = models[std::size_t(w)]->encode_file(f.path, depth, norm, &r.duration, &src);
          r.warnings = input_warnings(src, f.path, cfg.audio);
        } catch (const Error& e) {
          r.error = naming_file(f.path, e.what());
          return;
        }
        std::vector<std::int16_t> rows(std::size_t(r.codes.size()));
        for (Eigen::Index y = 0; y < r.codes.rows(); ++y)
          for (int c = 0; c < depth; ++c) rows[std::size_t(y) * depth + c] = std::int16_t(r.codes(y, c));
        fs::create_directories(out.parent_path());
        quant::write_npy_i16(out.string(), rows.data(), r.codes.rows(), depth);
      },
      [&](std::size_t i) {
        Result& r = results[i];
        for (const std::string& m : r.warnings) bar.message("warning: " + m);
        if (!r.error.empty()) {
          bar.message("skipped   " + r.error);
          failed.push_back(r.error);
          bar.update(double(++n), status());
          return;
        }
        if (r.skipped) {
          ++skipped;
        } else {
          quant::ManifestEntry e{files[i].path, tokens_path_for(files[i].relative), r.duration, r.codes.rows(), depth,
                                 cfg.audio.sample_rate, code_rate, info.model_id, K};
          log.append_line(quant::to_json_line(e));
          audio_s += r.duration;
        }
        if (flat) {
          // Stages interleaved frame by frame; stage s offset by s·K, one line per file.
          std::string line;
          for (Eigen::Index y = 0; y < r.codes.rows(); ++y)
            for (Eigen::Index c = 0; c < r.codes.cols(); ++c) {
              if (!line.empty()) line += ' ';
              line += std::to_string(r.codes(y, c) + int(c) * K);
            }
          line += '\n';
          flat->write(line);
        }
        r.codes.resize(0, 0);  // committed: free it
        bar.update(double(++n), status());
      });
  bar.finish(status());
  // The flat file holds one line per input in input order, so it is only complete when
  // every file was encoded; otherwise it is not written at all (its temporary file goes).
  if (flat && failed.empty()) flat->commit();
  const std::size_t encoded = files.size() - skipped - failed.size();
  const bool nothing = fresh_out && encoded == 0 && skipped == 0;
  // Leave no empty output folder behind: the manifest goes here, the folder with the lock
  // that made it (FolderLock removes a folder it created once it is empty).
  if (nothing) fs::remove(manifest, ec);
  std::printf("encoded   %zu files (%zu already done) at depth %d -> %s\n", encoded, skipped, depth, a.out.c_str());
  if (!nothing) std::printf("manifest  %s\n", manifest.c_str());
  if (!failed.empty())
    throw Error(std::to_string(failed.size()) + " of " + std::to_string(files.size()) +
                " files could not be encoded (each named above); the rest are done, and a rerun retries only these");
  return 0;
}

}  // namespace

Run register_encode(CLI::App& app) {
  auto a = std::make_shared<EncodeArgs>();
  CLI::App* cmd = app.add_subcommand("encode", "tokenize audio files, folders or list files into .npy code files");
  cmd->add_option("--model", a->model, "model.safetensors")->required()->check(CLI::ExistingFile);
  cmd->add_option("inputs", a->inputs, "audio files, folders (recursive) or list files")->required();
  cmd->add_option("-o,--out", a->out, "output folder (mirrors the input tree, plus manifest.jsonl)")->required();
  cmd->add_option("--depth", a->depth, "stages to keep (default: all)");
  cmd->add_option("--shard", a->shard, "take every n-th file starting at the i-th (0-based): i/n");
  cmd->add_option("--jobs", a->jobs, "threads (default: all cores)");
  cmd->add_option("--flat", a->flat, "also write one line of integer tokens per file (stage s offset by s*K)");
  return [a] { return run_encode(*a); };
}

}  // namespace tessera::cli
