// train_step_bench.cpp — times one training step of configs/bench.yaml (batch 16 × 200
// frames: encoder, 8-stage codebook search + EMA update, decoder, backward, clipping,
// Adam) at each thread count, the same work as the PyTorch peer's `--mode train`.
// Usage: bench_train_step [--threads 1,2] [--repeats 7] [--warmup 2] [--config FILE] [--json]
#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstring>
#include <random>
#include <sstream>
#include <string>
#include <vector>

#include "quant/experiment_config.h"
#include "quant/tokenizer.h"
#include "quant/train_step.h"

using namespace tessera::quant;

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
  const ExperimentConfig cfg = load_experiment(config, {});
  const int B = cfg.train.batch_size, M = cfg.model.n_mels, T = cfg.train.segment_frames;
  // Peer's analytic count for the reference architecture (torch_reference.py docstring).
  const double gflop = 2.0 * 9'482'240.0 * B * T / 1e9;
  std::vector<int> counts;
  std::stringstream ss(threads);
  for (std::string t; std::getline(ss, t, ',');) counts.push_back(std::atoi(t.c_str()));
  if (!json) std::printf("| threads | median ms | min ms | max ms | GFLOP/s (peer count %.1f GFLOP) |\n|---|---|---|---|---|\n", gflop);
  std::string out = "{";
  for (int th : counts) {
    ExperimentConfig c = cfg;
    c.codebooks.threads = th;
    Tokenizer tok(c, th, B * T / c.model.hop());
    tok.init(1);
    std::mt19937_64 rng(3);
    std::normal_distribution<float> g;
    Tensor x(B, M, T);
    for (std::size_t i = 0; i < x.size(); ++i) x.data()[i] = g(rng);
    Tensor z;
    tok.encoder().forward(x, z, tok.slab(), false);
    tok.codebooks().init_from(Eigen::MatrixXf(z.all()));
    TrainStep step(tok, c.train);
    std::vector<double> ms;
    for (int r = 0; r < warmup + repeats; ++r) {
      const auto t0 = std::chrono::steady_clock::now();
      step.run(x, c.codebooks.stages, 1e-4);
      const double dt = std::chrono::duration<double, std::milli>(std::chrono::steady_clock::now() - t0).count();
      if (r >= warmup) ms.push_back(dt);
    }
    std::sort(ms.begin(), ms.end());
    const double med = ms[ms.size() / 2];
    if (!json) std::printf("| %d | %.1f | %.1f | %.1f | %.1f |\n", th, med, ms.front(), ms.back(), gflop / (med / 1e3));
    char buf[160];
    std::snprintf(buf, sizeof buf, "%s\"%d\": {\"median_ms\": %.2f, \"min_ms\": %.2f, \"max_ms\": %.2f}", out.size() > 1 ? ", " : "",
                  th, med, ms.front(), ms.back());
    out += buf;
  }
  if (json) std::printf("{\"train_step_ms\": %s}}\n", out.c_str());
  return 0;
}
