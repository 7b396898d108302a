// tokenize_bench.cpp — times inference on a 60 s utterance (6000 feature frames) with
// configs/bench.yaml, the same work as the PyTorch peer's `--mode encode` (normalised
// log-mel → encoder → 8-stage nearest-code search) and `--mode decode` (codes → code
// lookup → decoder → log-mel). Untrained weights: the cost does not depend on them.
// `tessera bench` times the same pieces (cli/bench/work.h) beside the others.
// Usage: bench_tokenize [--threads 1,2] [--repeats 7] [--warmup 2] [--frames 6000] [--config FILE]
#include <cstdio>
#include <string>

#include "cli/bench/measure.h"
#include "cli/bench/work.h"

using namespace tessera;

int main(int argc, char** argv) {
  std::string config = std::string(TESSERA_SOURCE_DIR) + "/configs/bench.yaml", threads = "1,2";
  int repeats = 7, warmup = 2, frames = 6000;
  for (int i = 1; i < argc; ++i) {
    const std::string a = argv[i];
    auto next = [&] { return i + 1 < argc ? std::string(argv[++i]) : std::string(); };
    if (a == "--threads") threads = next();
    else if (a == "--repeats") repeats = std::max(1, std::atoi(next().c_str()));
    else if (a == "--warmup") warmup = std::max(0, std::atoi(next().c_str()));
    else if (a == "--frames") frames = std::max(64, std::atoi(next().c_str()));
    else if (a == "--config") config = next();
    else {
      std::fprintf(stderr, "usage: %s [--threads 1,2] [--repeats N] [--warmup N] [--frames N] [--config FILE]\n", argv[0]);
      return 2;
    }
  }
  const quant::ExperimentConfig cfg = quant::load_experiment(config, {});
  const double audio_s = double(frames) * cfg.audio.hop_length / cfg.audio.sample_rate;
  std::printf("%.0f s utterance (%d frames), %d stages x %d codes\n\n", audio_s, frames, cfg.codebooks.stages,
              cfg.codebooks.codes);
  std::printf("| work | threads | median ms | min ms | max ms | real-time factor |\n|---|---|---|---|---|---|\n");
  for (int th : bench::parse_thread_list(threads)) {
    const bench::Spread enc = bench::spread_of(bench::time_encode(cfg, th, frames, warmup, repeats));
    const bench::Spread dec = bench::spread_of(bench::time_decode(cfg, th, frames, warmup, repeats));
    for (auto [name, s] : {std::pair{"encode", enc}, std::pair{"decode", dec}})
      std::printf("| %s | %d | %.1f | %.1f | %.1f | %.0fx |\n", name, th, s.median, s.min, s.max,
                  audio_s / (s.median / 1e3));
  }
  return 0;
}
