// tokenize_bench.cpp — times inference on a 60 s utterance (6000 feature frames) with
// configs/bench.yaml, the same work as the PyTorch peer's `--mode encode` (normalised
// log-mel → encoder → 8-stage nearest-code search) and `--mode decode` (codes → code
// lookup → decoder → log-mel). Untrained weights: the cost does not depend on them.
// Usage: bench_tokenize [--threads 1,2] [--repeats 7] [--warmup 2] [--frames 6000] [--config FILE]
#include <algorithm>
#include <chrono>
#include <cstdio>
#include <random>
#include <sstream>
#include <string>
#include <vector>

#include "quant/experiment_config.h"
#include "quant/tokenizer.h"

using namespace tessera::quant;

namespace {

template <class F>
std::vector<double> time_ms(int warmup, int repeats, F&& f) {
  std::vector<double> ms;
  for (int r = 0; r < warmup + repeats; ++r) {
    const auto t0 = std::chrono::steady_clock::now();
    f();
    const double dt = std::chrono::duration<double, std::milli>(std::chrono::steady_clock::now() - t0).count();
    if (r >= warmup) ms.push_back(dt);
  }
  std::sort(ms.begin(), ms.end());
  return ms;
}

}  // namespace

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
  const ExperimentConfig cfg = load_experiment(config, {});
  const double audio_s = double(frames) * cfg.audio.hop_length / cfg.audio.sample_rate;
  std::vector<int> counts;
  std::stringstream ss(threads);
  for (std::string t; std::getline(ss, t, ',');) counts.push_back(std::atoi(t.c_str()));
  std::printf("%.0f s utterance (%d frames), %d stages x %d codes\n\n", audio_s, frames, cfg.codebooks.stages,
              cfg.codebooks.codes);
  std::printf("| work | threads | median ms | min ms | max ms | real-time factor |\n|---|---|---|---|---|---|\n");
  for (int th : counts) {
    ExperimentConfig c = cfg;
    c.codebooks.threads = th;
    Tokenizer tok(c, th, frames / c.model.hop());
    tok.init(1);
    std::mt19937_64 rng(3);
    std::normal_distribution<float> g;
    // Unit-variance features after normalisation, as the peer's torch.randn input.
    Eigen::MatrixXf mel(c.model.n_mels, frames);
    for (Eigen::Index i = 0; i < mel.size(); ++i) mel.data()[i] = g(rng);
    Eigen::MatrixXi codes;
    const auto enc = time_ms(warmup, repeats, [&] { codes = tok.encode(mel, c.codebooks.stages); });
    std::uniform_int_distribution<int> u(0, c.codebooks.codes - 1);
    for (Eigen::Index i = 0; i < codes.size(); ++i) codes.data()[i] = u(rng);
    Eigen::MatrixXf back;
    const auto dec = time_ms(warmup, repeats, [&] { back = tok.decode(codes, c.codebooks.stages); });
    for (auto [name, ms] : {std::pair{"encode", &enc}, std::pair{"decode", &dec}}) {
      const double med = (*ms)[ms->size() / 2];
      std::printf("| %s | %d | %.1f | %.1f | %.1f | %.0fx |\n", name, th, med, ms->front(), ms->back(),
                  audio_s / (med / 1e3));
    }
  }
  return 0;
}
