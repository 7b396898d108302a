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

using namespace tessera::audio;

namespace {

// Syllables of voiced sound (glottal pulses through three formant resonators, 4 per second,
// formants and pitch moving), with fricative noise bursts and pauses.
std::vector<float> speech_like(int sr, double seconds, unsigned seed) {
  const std::size_t n = std::size_t(sr * seconds);
  std::vector<float> x(n, 0.0f);
  std::mt19937 rng(seed);
  std::uniform_real_distribution<double> u(0.0, 1.0);
  std::normal_distribution<double> g(0.0, 1.0);
  const double formants[][3] = {{730, 1090, 2440}, {270, 2290, 3010}, {530, 1840, 2480},
                                {570, 840, 2410},  {300, 870, 2240},  {660, 1720, 2410}};
  double y1[3] = {0, 0, 0}, y2[3] = {0, 0, 0}, phase = 0.0;
  const std::size_t syl = std::size_t(sr / 4);
  int vowel = 0, next = 1;
  bool fricative = false, pause = false;
  for (std::size_t i = 0; i < n; ++i) {
    if (i % syl == 0) {
      vowel = next;
      next = int(u(rng) * 6);
      fricative = u(rng) < 0.3;
      pause = u(rng) < 0.1;
    }
    const double pos = double(i % syl) / double(syl), t = double(i) / sr;
    const double env = pause ? 0.0 : std::sin(std::numbers::pi * pos);
    const double f0 = 120.0 + 30.0 * std::sin(2.0 * std::numbers::pi * 0.7 * t) + 15.0 * pos;
    phase += f0 / sr;
    double src = 0.0;
    if (phase >= 1.0) {
      phase -= 1.0;
      src = 1.0;  // glottal pulse
    }
    double v = 0.0;
    for (int k = 0; k < 3; ++k) {  // two-pole resonators, formants gliding to the next vowel
      const double f = formants[vowel][k] + pos * (formants[next][k] - formants[vowel][k]);
      const double bw = 60.0 + 40.0 * k, r = std::exp(-std::numbers::pi * bw / sr);
      const double y = src + 2.0 * r * std::cos(2.0 * std::numbers::pi * f / sr) * y1[k] - r * r * y2[k];
      y2[k] = y1[k];
      y1[k] = y;
      v += y / (k + 1);
    }
    double s = 0.02 * v * env;
    if (fricative && pos > 0.75) s += 0.05 * g(rng) * std::sin(std::numbers::pi * (pos - 0.75) * 4.0);
    x[i] = float(s + 1e-4 * g(rng));
  }
  float peak = 0.0f;
  for (float v : x) peak = std::max(peak, std::abs(v));
  for (float& v : x) v *= 0.5f / peak;
  return x;
}

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
  const std::vector<float> x = speech_like(cfg.sample_rate, seconds, 1);
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
