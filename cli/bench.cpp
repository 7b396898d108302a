// bench.cpp — `tessera bench [--json] [--threads 1,2] [--peer SCRIPT]`: times training,
// encode, decode and resynthesis of the reference architecture (configs/bench.yaml, which
// equals the built-in defaults) at each thread count, each piece in its own process for its
// peak memory, and `tessera encode` of a long WAV; with the PyTorch peer, the same work
// from it, alternating tessera and peer runs (A B A B).
#include <unistd.h>

#include <cstdio>
#include <cstdlib>
#include <filesystem>

#include <nlohmann/json.hpp>

#include "audio/error.h"
#include "cli/bench/child.h"
#include "cli/bench/figures.h"
#include "cli/bench/measure.h"
#include "cli/bench/peer.h"
#include "cli/bench/speech_like.h"
#include "cli/bench/work.h"
#include "cli/command.h"
#include "cli/progress.h"
#include "quant/checkpoint.h"

namespace tessera::cli {
namespace fs = std::filesystem;
namespace {

struct BenchArgs {
  ConfigArgs config;
  std::string threads = "1,2", peer;
  int repeats = 5, warmup = 2, rounds = 2;
  double long_minutes = 60;
  bool json = false, quick = false;
};

// The real tessera binary encoding a long synthetic WAV, as a user runs it: peak memory
// and wall time. Runs first, while this process is small (a forked child's ru_maxrss
// starts from the pages it shares with its parent).
void measure_long_encode(const quant::ExperimentConfig& cfg, double seconds, bench::Figures& f) {
  std::string pattern = (fs::temp_directory_path() / "tessera-bench-XXXXXX").string();  // honours TMPDIR
  if (!::mkdtemp(pattern.data())) throw Error("cannot make a temporary folder from '" + pattern + "'");
  const fs::path dir = pattern;
  struct Cleanup {
    fs::path d;
    ~Cleanup() {
      std::error_code ec;
      fs::remove_all(d, ec);
    }
  } cleanup{dir};
  const std::string model = (dir / "model.safetensors").string(), wav = (dir / "long.wav").string();
  bench::run_in_child([&] {
    quant::Tokenizer tok(cfg, 1);
    tok.init(1);
    quant::save_model(tok, model, 0);
    return std::string();
  });
  bench::run_in_child([&] {
    bench::write_speech_like_wav(wav, cfg.audio.sample_rate, seconds, 7);
    return std::string();
  });
  char self[4096];
  const ssize_t n = ::readlink("/proc/self/exe", self, sizeof self - 1);
  if (n <= 0) throw Error("cannot find the tessera binary (/proc/self/exe)");
  self[n] = '\0';
  const double t0 = bench::now_ms();
  const bench::ChildResult r =
      bench::run_program({self, "encode", "--model", model, wav, "--out", (dir / "codes").string()});
  f.long_wall_s = (bench::now_ms() - t0) / 1e3;
  if (r.exit_code != 0)
    throw Error("tessera encode of the long file failed (exit code " + std::to_string(r.exit_code) +
                "): " + r.output.substr(r.output.size() > 400 ? r.output.size() - 400 : 0));
  f.long_s = seconds, f.long_peak_mb = r.peak_mb;
}

// One tessera piece in a child process: its timings, peak memory and the other load.
void measure_piece(bench::Piece& piece, std::vector<double>& loads, int threads,
                   const std::function<std::vector<double>()>& work) {
  const bench::ChildResult r = bench::run_in_child([&] {
    bench::OtherLoad load;
    const std::vector<double> ms = work();
    return nlohmann::json({{"ms", ms}, {"load", load.fraction()}}).dump();
  });
  const nlohmann::json j = nlohmann::json::parse(r.output);
  piece.add(threads, j.at("ms").get<std::vector<double>>(), r.peak_mb);
  loads.push_back(j.at("load").get<double>());
}

int run_bench(BenchArgs a) {
  if (a.quick) a.repeats = 1, a.warmup = 0, a.rounds = 1, a.long_minutes = std::min(a.long_minutes, 0.5);
  if (a.repeats < 1 || a.warmup < 0 || a.rounds < 1 || a.long_minutes <= 0)
    throw Error("--repeats and --rounds must be at least 1, --warmup at least 0, --long-minutes above 0");
  const quant::ExperimentConfig cfg = quant::load_experiment(a.config.config, a.config.overrides);
  bench::Figures f;
  f.config = a.config.config.empty() ? "built-in defaults (= configs/bench.yaml)" : a.config.config;
  f.threads = bench::parse_thread_list(a.threads);
  f.repeats = a.repeats, f.warmup = a.warmup, f.rounds = a.rounds;
  const int hop_frames = cfg.model.hop();
  const int utt_frames = (a.quick ? 1000 : 6000) / hop_frames * hop_frames;  // 10 s quick, else 60 s
  const double frame_s = double(cfg.audio.hop_length) / cfg.audio.sample_rate;
  f.tessera.utterance_s = utt_frames * frame_s;
  f.train_audio_s = cfg.train.batch_size * cfg.train.segment_frames * frame_s;
  f.resynth_s = a.quick ? 2.0 : 10.0;
  f.resynth_iters = cfg.audio.griffin_lim_iters;
  f.resynth_method = audio::to_string(cfg.audio.inversion);
  const bench::Peer peer(a.peer);
  if (peer.available()) {
    f.peer.emplace();
    f.peer_script = peer.script();
  }
  if (!a.json) {
    std::printf("tessera bench: %s; %d mels, %d channels, %d x %d codes; threads %s\n", f.config.c_str(),
                cfg.model.n_mels, cfg.model.channels, cfg.codebooks.stages, cfg.codebooks.codes, a.threads.c_str());
    if (peer.available()) std::printf("peer: %s (alternating runs, same threads)\n", peer.script().c_str());
    else std::printf("peer: not given (--peer SCRIPT or TESSERA_PEER); its columns are skipped\n");
    std::fflush(stdout);
  } else if (!peer.available()) {
    std::fprintf(stderr, "note: no peer (--peer SCRIPT or TESSERA_PEER); \"peer\" is null\n");
  }

  const int sides = peer.available() ? 2 : 1, per_round = int(f.threads.size()) * 3 * sides + 1;
  Progress bar("bench", double(per_round * a.rounds + 1), "runs/s");
  double done = 0;
  bar.update(done, "  encoding a long file");
  measure_long_encode(cfg, a.long_minutes * 60, f);
  bar.update(++done);

  const std::vector<float> speech = bench::speech_like(cfg.audio.sample_rate, f.resynth_s, 1);
  bench::Side& T = f.tessera;
  for (int round = 0; round < a.rounds; ++round) {
    auto both = [&](const char* what, bench::Piece bench::Side::*piece, const char* mode, int th,
                    const std::function<std::vector<double>()>& work) {
      const std::vector<std::string> shape =
          std::string(mode) == "train"
              ? std::vector<std::string>{"--batch", std::to_string(cfg.train.batch_size), "--frames",
                                         std::to_string(cfg.train.segment_frames)}
              : std::vector<std::string>{"--utt-frames", std::to_string(utt_frames)};
      bar.update(done, std::string("  ") + what + ", " + std::to_string(th) + " thread(s)");
      measure_piece(T.*piece, T.loads, th, work);
      bar.update(++done);
      if (!peer.available()) return;
      bar.update(done, std::string("  ") + what + ", " + std::to_string(th) + " thread(s), peer");
      const bench::PeerRun p = peer.run(mode, th, a.repeats, a.warmup, shape);
      if (std::string(mode) != "train") f.peer->utterance_s = p.audio_s;
      ((*f.peer).*piece).add(th, p.ms, p.peak_mb);
      f.peer->loads.push_back(p.other_load);
      f.peer_blas = p.blas;
      bar.update(++done);
    };
    for (int th : f.threads)
      both("train step", &bench::Side::train, "train", th,
           [&] { return bench::time_train_steps(cfg, th, a.warmup, a.repeats); });
    for (int th : f.threads)
      both("encode", &bench::Side::encode, "encode", th,
           [&] { return bench::time_encode(cfg, th, utt_frames, a.warmup, a.repeats); });
    for (int th : f.threads)
      both("decode", &bench::Side::decode, "decode", th,
           [&] { return bench::time_decode(cfg, th, utt_frames, a.warmup, a.repeats); });
    bar.update(done, "  resynthesis");
    measure_piece(T.resynth, T.loads, 1, [&] { return bench::time_resynth(cfg.audio, speech, a.warmup, a.repeats); });
    bar.update(++done);
  }
  bar.finish();
  if (a.json) std::printf("%s\n", bench::figures_json(f).c_str());
  else bench::print_table(f);
  return 0;
}

}  // namespace

Run register_bench(CLI::App& app) {
  auto a = std::make_shared<BenchArgs>();
  CLI::App* cmd = app.add_subcommand(
      "bench", "time training, encode, decode and resynthesis of the reference model (and the PyTorch peer's)");
  a->config.add_to(*cmd);
  cmd->add_option("--threads", a->threads, "thread counts to measure, comma-separated")->capture_default_str();
  cmd->add_option("--peer", a->peer, "PyTorch peer script (default: $TESSERA_PEER; none: tessera only)");
  cmd->add_option("--repeats", a->repeats, "timed runs per piece and round")->capture_default_str();
  cmd->add_option("--warmup", a->warmup, "untimed runs before them")->capture_default_str();
  cmd->add_option("--rounds", a->rounds, "rounds of alternating tessera and peer runs")->capture_default_str();
  cmd->add_option("--long-minutes", a->long_minutes, "length of the WAV `tessera encode` runs on")->capture_default_str();
  cmd->add_flag("--quick", a->quick, "one run each, 10 s utterance, 30 s long file: a smoke test, not figures");
  cmd->add_flag("--json", a->json, "print one JSON object instead of the table");
  return [a] { return run_bench(*a); };
}

}  // namespace tessera::cli
