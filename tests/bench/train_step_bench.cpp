// train_step_bench.cpp — times one training step of configs/bench.yaml (batch 16 × 200
// frames: encoder, 8-stage codebook search + EMA update, decoder, backward, clipping,
// Adam) at each thread count, the same work as the PyTorch peer's `--mode train`.
// `tessera bench` times the same piece (cli/bench/work.h) beside the others.
// Usage: bench_train_step [--threads 1,2] [--repeats 7] [--warmup 2] [--config FILE] [--json]
#include <cstdio>
#include <string>

#include "cli/bench/measure.h"
#include "cli/bench/work.h"

using namespace tessera;

int main(int argc, char** argv) {
  std::string config = std::string(TESSERA_SOURCE_DIR) + "/configs/bench.yaml", threads = "1,2";
  int repeats = 7, warmup = 2;
  bool json = false;
  for (int i = 1; i < argc; ++i) {
    const std::string a = argv[i];
    auto next = [&] { return i + 1 < argc ? std::string(argv[++i]) : std::string(); };
    if (a == "--threads") threads = next();
    else if (a == "--repeats") repeats = std::max(1, std::atoi(next().c_str()));
    else if (a == "--warmup") warmup = std::max(0, std::atoi(next().c_str()));
    else if (a == "--config") config = next();
    else if (a == "--json") json = true;
    else { std::fprintf(stderr, "usage: %s [--threads 1,2] [--repeats N] [--warmup N] [--config FILE] [--json]\n", argv[0]); return 2; }
  }
  const quant::ExperimentConfig cfg = quant::load_experiment(config, {});
  // Peer's analytic count for the reference architecture (torch_reference.py docstring).
  const double gflop = 2.0 * 9'482'240.0 * cfg.train.batch_size * cfg.train.segment_frames / 1e9;
  if (!json) std::printf("| threads | median ms | min ms | max ms | GFLOP/s (peer count %.1f GFLOP) |\n|---|---|---|---|---|\n", gflop);
  std::string out = "{";
  for (int th : bench::parse_thread_list(threads)) {
    const bench::Spread s = bench::spread_of(bench::time_train_steps(cfg, th, warmup, repeats));
    if (!json) std::printf("| %d | %.1f | %.1f | %.1f | %.1f |\n", th, s.median, s.min, s.max, gflop / (s.median / 1e3));
    char buf[160];
    std::snprintf(buf, sizeof buf, "%s\"%d\": {\"median_ms\": %.2f, \"min_ms\": %.2f, \"max_ms\": %.2f}", out.size() > 1 ? ", " : "",
                  th, s.median, s.min, s.max);
    out += buf;
  }
  if (json) std::printf("{\"train_step_ms\": %s}}\n", out.c_str());
  return 0;
}
