// audio_bench.cpp — real-time factors of the signal-processing core and inversion quality per variant.
// Usage: bench_audio_bench [speech.f32]
//   Times STFT, log-mel, NNLS and Griffin-Lim (64 iterations) on 10 s of synthetic speech-like
//   audio at 16 kHz (reference front end, one thread) and prints SC / LSD / MCD / log-mel L1 of
//   log-mel -> invert_log_mel -> compare_signals for each inversion variant. With a file of raw
//   little-endian float32 mono samples at 16 kHz, the quality table is repeated on it.
// RTF = seconds of audio per second (wall clock, and this thread's CPU time).
#include <chrono>
#include <ctime>
#include <cmath>
#include <cstdio>
#include <fstream>
#include <functional>
#include <numbers>
#include <random>
#include <string>
#include <vector>

#include "audio/griffin_lim.h"
#include "audio/log_mel.h"
#include "audio/mel_inverse.h"
#include "audio/signal_metrics.h"
#include "audio/stft.h"
#include "cli/bench/speech_like.h"

using namespace tessera::audio;

namespace {

struct Timing {
  double wall = 1e300, cpu = 1e300;  // seconds, best of the repetitions
};

double thread_cpu_seconds() {
  timespec ts{};
  clock_gettime(CLOCK_THREAD_CPUTIME_ID, &ts);
  return double(ts.tv_sec) + 1e-9 * double(ts.tv_nsec);
}

// Best of `reps` runs of fn: wall-clock time and this thread's CPU time (the latter is what a
// quiet machine would show when other jobs share the cores).
Timing best_time(int reps, const std::function<void()>& fn) {
  Timing best;
  for (int r = 0; r < reps; ++r) {
    const double c0 = thread_cpu_seconds();
    const auto t0 = std::chrono::steady_clock::now();
    fn();
    best.wall = std::min(best.wall, std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count());
    best.cpu = std::min(best.cpu, thread_cpu_seconds() - c0);
  }
  return best;
}

void quality_table(const char* title, const std::vector<float>& x, const AudioConfig& base) {
  std::printf("\n%s (%.2f s): log-mel -> invert_log_mel (%d iterations) -> compare_signals\n", title,
              double(x.size()) / base.sample_rate, base.griffin_lim_iters);
  std::printf("| variant | SC | LSD dB | MCD dB | log-mel L1 | RTF (cpu) |\n|---|---|---|---|---|---|\n");
  const Eigen::MatrixXf lm = log_mel(base, x);
  for (Inversion inv : {Inversion::plain, Inversion::fast, Inversion::mel_consistent, Inversion::nnls}) {
    AudioConfig cfg = base;
    cfg.inversion = inv;
    MelInverter inverter(cfg);
    std::vector<float> y;
    const double s = best_time(1, [&] { y = inverter.invert(lm, x.size()); }).cpu;
    const SignalMetrics m = compare_signals(cfg, x, y);
    std::printf("| %s | %.3f | %.2f | %.2f | %.3f | %.1f |\n", to_string(inv), m.spectral_convergence, m.lsd_db,
                m.mcd_db, m.mel_l1, double(x.size()) / cfg.sample_rate / s);
  }
}

}  // namespace

int main(int argc, char** argv) {
  const AudioConfig cfg;  // 16 kHz, n_fft 1024, hop 160, 80 Slaney mels, 64 iterations
  const double seconds = 10.0;
  const std::vector<float> x = tessera::bench::speech_like(cfg.sample_rate, seconds, 1);
  const std::size_t L = x.size();
  const int reps = 3;

  Stft stft(cfg);
  LogMel lm(cfg);
  MelFilterbank fb(cfg);
  GriffinLim gl(cfg);
  Eigen::MatrixXcf X;
  Eigen::MatrixXf feats;
  stft.forward(x.data(), L, X);
  const Eigen::MatrixXf S = magnitude(X);
  lm.compute(x.data(), L, feats);
  const Eigen::MatrixXf mel = feats.array().exp().matrix();
  const Eigen::MatrixXf a0 = pinv_start(fb, mel);
  GriffinLimOptions opt;
  opt.iters = cfg.griffin_lim_iters;
  opt.momentum = cfg.momentum;

  std::printf("tessera audio benchmark: %.0f s synthetic speech-like audio, %d Hz, n_fft %d, hop %d, "
              "%d mels, 1 thread\n\n| stage | wall s | RTF | cpu s | RTF (cpu) |\n|---|---|---|---|---|\n",
              seconds, cfg.sample_rate, cfg.n_fft, cfg.hop_length, cfg.n_mels);
  auto row = [&](const char* name, Timing t) {
    std::printf("| %s | %.4f | %.1f | %.4f | %.1f |\n", name, t.wall, seconds / t.wall, t.cpu, seconds / t.cpu);
  };
  row("stft forward", best_time(reps, [&] { stft.forward(x.data(), L, X); }));
  row("istft", best_time(reps, [&] { (void)stft.inverse(X, L); }));
  row("log-mel", best_time(reps, [&] { lm.compute(x.data(), L, feats); }));
  row("pseudo-inverse start", best_time(reps, [&] { (void)pinv_start(fb, mel); }));
  row("nnls magnitude (nnls_iters)", best_time(reps, [&] { (void)nnls_magnitude(fb, mel, a0, cfg.nnls_iters); }));
  {  // The floor any 64-iteration Griffin-Lim pays here: one real FFT and one inverse per frame and iteration.
    RealFft fft(cfg.n_fft);
    std::vector<float> frame(x.begin(), x.begin() + cfg.n_fft), back(std::size_t(cfg.n_fft));
    std::vector<std::complex<float>> bins(std::size_t(cfg.n_bins()));
    row("fft floor: 64 x T rfft+irfft", best_time(reps, [&] {
          for (int it = 0; it < 64; ++it)
            for (Eigen::Index t = 0; t < X.cols(); ++t) {
              fft.forward(frame.data(), bins.data());
              fft.inverse(bins.data(), back.data());
            }
        }));
  }
  row("griffin-lim plain, 64 it", best_time(reps, [&] { (void)gl.run(S, L, GriffinLimVariant::plain, opt); }));
  row("griffin-lim fast, 64 it", best_time(reps, [&] { (void)gl.run(S, L, GriffinLimVariant::fast, opt); }));
  row("griffin-lim mel-consistent, 64 it",
      best_time(reps, [&] { (void)gl.run_mel_consistent(mel, a0, fb, L, opt); }));
  for (Inversion inv : {Inversion::mel_consistent, Inversion::nnls}) {
    AudioConfig c = cfg;
    c.inversion = inv;
    MelInverter inverter(c);
    const std::string name = std::string("invert_log_mel ") + to_string(inv);
    row(name.c_str(), best_time(reps, [&] { (void)inverter.invert(feats, L); }));
  }

  quality_table("synthetic speech-like", x, cfg);
  if (argc > 1) {
    std::ifstream in(argv[1], std::ios::binary | std::ios::ate);
    if (!in) {
      std::fprintf(stderr, "error: cannot open '%s'\n", argv[1]);
      return 1;
    }
    std::vector<float> file(std::size_t(in.tellg()) / sizeof(float));
    in.seekg(0);
    in.read(reinterpret_cast<char*>(file.data()), std::streamsize(file.size() * sizeof(float)));
    quality_table(argv[1], file, cfg);
  }
  return 0;
}
