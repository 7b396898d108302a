// layers_bench.cpp — training-step cost of the encoder + decoder (forward and backward) at
// the reference architecture, and long-utterance inference, at 1 and 2 threads.
// B batch, M mels, C channels, D latent dims, T frames.
//
// Usage: bench_layers [--threads 1,2] [--repeats 7] [--warmup 2] [--batch 16] [--frames 200]
//                     [--utt-frames 6000] [--no-infer]
// Work is counted as torch_reference.py does: a conv costs its forward MACs three times in
// training, minus the encoder input conv's input gradient:
//   3·(1,544,192 + 1,576,960) − 143,360 = 9,220,096 MACs per frame (59.0 GFLOP at 16×200).
// The peer's whole train step adds the 8-stage codebook search (262,144 MACs per frame)
// for 60.7 GFLOP; compare with: torch_reference.py --mode train --threads N.
#include <time.h>
#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <random>
#include <string>
#include <vector>

#include "cli/bench/measure.h"
#include "quant/decoder.h"
#include "quant/encoder.h"

using namespace tessera::quant;
using namespace tessera::bench;

namespace {

constexpr double kEncMacsPerFrame = 1544192, kDecMacsPerFrame = 1576960, kEncInMacsPerFrame = 143360;
constexpr double kTrainMacsPerFrame = 3 * (kEncMacsPerFrame + kDecMacsPerFrame) - kEncInMacsPerFrame;

struct Args {
  std::vector<int> threads = {1, 2};
  int repeats = 7, warmup = 2, batch = 16, frames = 200, utt_frames = 6000;
  bool infer = true;
};

Args parse(int argc, char** argv) {
  Args a;
  for (int i = 1; i < argc; ++i) {
    const std::string k = argv[i];
    auto next = [&]() -> const char* {
      if (i + 1 >= argc) {
        std::fprintf(stderr, "error: %s needs a value\n", k.c_str());
        std::exit(2);
      }
      return argv[++i];
    };
    if (k == "--threads") {
      a.threads = parse_thread_list(next());
    } else if (k == "--repeats") a.repeats = std::atoi(next());
    else if (k == "--warmup") a.warmup = std::atoi(next());
    else if (k == "--batch") a.batch = std::atoi(next());
    else if (k == "--frames") a.frames = std::atoi(next());
    else if (k == "--utt-frames") a.utt_frames = std::atoi(next());
    else if (k == "--no-infer") a.infer = false;
    else {
      std::fprintf(stderr, "error: unknown option '%s' (see the usage line in layers_bench.cpp)\n", k.c_str());
      std::exit(2);
    }
  }
  return a;
}

void fill_normal(Tensor& t, std::mt19937_64& rng) {
  std::normal_distribution<float> nd;
  for (std::size_t i = 0; i < t.size(); ++i) t.data()[i] = nd(rng);
}

}  // namespace

int main(int argc, char** argv) {
  const Args a = parse(argc, argv);
  const ModelConfig cfg;  // reference architecture
  std::printf("encoder+decoder training step, B=%d T=%d, %.2f GFLOP (layers; peer step incl. search 60.7)\n",
              a.batch, a.frames, 2 * kTrainMacsPerFrame * a.batch * a.frames / 1e9);
  for (int threads : a.threads) {
    ParamSlab slab;
    ThreadPool pool(threads);
    Encoder enc(cfg, slab, pool);
    Decoder dec(cfg, slab, pool);
    std::mt19937_64 rng(1);
    enc.init(slab, rng);
    dec.init(slab, rng);
    Tensor x(a.batch, cfg.n_mels, a.frames), z, y, dy, dz;
    fill_normal(x, rng);
    enc.reserve(a.batch, a.frames, slab);
    dec.reserve(a.batch, enc.out_frames(a.frames), slab);

    std::vector<double> t_zero, t_ef, t_df, t_db, t_eb, t_tot, t_cpu;
    OtherLoad load;
    for (int rep = 0; rep < a.warmup + a.repeats; ++rep) {
      const double c0 = process_cpu_ms();
      const double t0 = now_ms();
      slab.zero_grad();
      const double t1 = now_ms();
      enc.forward(x, z, slab);
      const double t2 = now_ms();
      dec.forward(z, y, slab);
      const double t3 = now_ms();
      // dL/dy of L = mean (y − x)² (a stand-in loss; the real one is the trainer's).
      dy.resize(y.B(), y.C(), y.T());
      const float scale = 2.0f / float(y.size());
      for (std::size_t i = 0; i < y.size(); ++i) dy.data()[i] = scale * (y.data()[i] - x.data()[i]);
      const double t4 = now_ms();
      dec.backward(dy, dz, slab);
      const double t5 = now_ms();
      enc.backward(dz, slab);  // straight-through: dL/dz = dL/dzq
      const double t6 = now_ms();
      const double c1 = process_cpu_ms();
      if (rep < a.warmup) continue;
      t_cpu.push_back(c1 - c0);
      t_zero.push_back(t1 - t0), t_ef.push_back(t2 - t1), t_df.push_back(t3 - t2);
      t_db.push_back(t5 - t4), t_eb.push_back(t6 - t5), t_tot.push_back(t6 - t0);
    }
    const double other = load.fraction();
    const double med = median_of(t_tot);
    const double gflop = 2 * kTrainMacsPerFrame * a.batch * a.frames / 1e9;
    std::printf("threads %d: %.1f ms per step (median of %d; min %.1f, max %.1f), %.1f GFLOP/s; "
                "CPU %.1f ms per step (%.1f GFLOP per CPU-s); other processes' load %.2f\n",
                threads, med, a.repeats, *std::min_element(t_tot.begin(), t_tot.end()),
                *std::max_element(t_tot.begin(), t_tot.end()), gflop / (med / 1e3), median_of(t_cpu),
                gflop / (median_of(t_cpu) / 1e3), other);
    std::printf("  zero_grad %.1f | enc fwd %.1f | dec fwd %.1f | dec bwd %.1f | enc bwd %.1f ms\n", median_of(t_zero),
                median_of(t_ef), median_of(t_df), median_of(t_db), median_of(t_eb));

    if (!a.infer) continue;
    Tensor xu(1, cfg.n_mels, a.utt_frames), zu, yu;
    fill_normal(xu, rng);
    std::vector<double> t_enc, t_dec;
    for (int rep = 0; rep < a.warmup + a.repeats; ++rep) {
      const double t0 = now_ms();
      enc.forward(xu, zu, slab, false);
      const double t1 = now_ms();
      dec.forward(zu, yu, slab, false);
      const double t2 = now_ms();
      if (rep >= a.warmup) t_enc.push_back(t1 - t0), t_dec.push_back(t2 - t1);
    }
    const double audio_s = a.utt_frames * 0.01;
    std::printf("  inference, one %d-frame item: encoder %.1f ms (%.0fx real time, %.1f GFLOP/s), "
                "decoder %.1f ms (%.0fx, %.1f GFLOP/s)\n",
                a.utt_frames, median_of(t_enc), audio_s / (median_of(t_enc) / 1e3),
                2 * kEncMacsPerFrame * a.utt_frames / 1e9 / (median_of(t_enc) / 1e3), median_of(t_dec),
                audio_s / (median_of(t_dec) / 1e3), 2 * kDecMacsPerFrame * a.utt_frames / 1e9 / (median_of(t_dec) / 1e3));
  }
  return 0;
}
