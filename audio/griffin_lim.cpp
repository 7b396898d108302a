// griffin_lim.cpp — the Griffin-Lim iteration loop: OLA, re-analysis, magnitude, momentum, phase.
// F bins, M mels, T frames, L samples, N = n_fft, W frames per batch (SIMD lanes).
#include "audio/griffin_lim.h"

#include <algorithm>
#include <cmath>
#include <numbers>
#include <random>
#include <string>

#include "audio/error.h"

namespace tessera::audio {

namespace {

constexpr int W = kFftLanes;

// Per-bin steps on one batch (W frames in SIMD lanes; F bins, M mels). A bin whose phase is
// undefined (zero) gets phase 0.

// mag[k] = |C[k]|.
void magnitudes(const LaneVec* c, int F, LaneVec* mag) {
  for (int k = 0; k < F; ++k) mag[k] = lane_sqrt(c[2 * k] * c[2 * k] + c[2 * k + 1] * c[2 * k + 1]);
}

// g = G·r for the dense M x M matrix G (column-major), eight rows at a time in registers.
void dense_apply(const Eigen::MatrixXf& G, const LaneVec* r, LaneVec* g) {
  const int M = int(G.rows());
  const float* p = G.data();
  int m0 = 0;
  for (; m0 + 8 <= M; m0 += 8) {
    LaneVec acc[8] = {};
    for (int c = 0; c < M; ++c) {
      const LaneVec x = r[c];
      const float* col = p + std::size_t(c) * std::size_t(M) + std::size_t(m0);
      for (int u = 0; u < 8; ++u) acc[u] += col[u] * x;
    }
    for (int u = 0; u < 8; ++u) g[m0 + u] = acc[u];
  }
  for (; m0 < M; ++m0) {
    LaneVec acc{};
    for (int c = 0; c < M; ++c) acc += p[std::size_t(c) * std::size_t(M) + std::size_t(m0)] * r[c];
    g[m0] = acc;
  }
}

// Aₙ = max(|C| + M⁺(mel − M·|C|), 0) with M⁺ = Mᵀ·(M·Mᵀ)⁺ (Penrose 1955), the filterbank sparse.
// res (M) keeps mel − M·|C| for the figures; g (M) and corr (F) are scratch.
void mel_correct(const MelFilterbank& fb, const LaneVec* mag, const LaneVec* mel, LaneVec* res, LaneVec* g,
                 LaneVec* corr, LaneVec* target) {
  const int M = fb.n_mels(), F = fb.n_bins();
  for (int m = 0; m < M; ++m) {
    const float* w = fb.weights(m);
    const LaneVec* x = mag + fb.first_bin(m);
    LaneVec acc{};
    for (int i = 0, n = fb.band_size(m); i < n; ++i) acc += w[i] * x[i];
    res[m] = mel[m] - acc;
  }
  dense_apply(fb.gram_pinv(), res, g);
  std::fill(corr, corr + F, LaneVec{});
  for (int m = 0; m < M; ++m) {
    const float* w = fb.weights(m);
    LaneVec* y = corr + fb.first_bin(m);
    const LaneVec gm = g[m];
    for (int i = 0, n = fb.band_size(m); i < n; ++i) y[i] += w[i] * gm;
  }
  for (int k = 0; k < F; ++k) {
    const LaneVec a = mag[k] + corr[k];
    target[k] = a > 0.0f ? a : LaneVec{};
  }
}

// y = A·P/|P| with P = C − β·prev; prev ← C.
void momentum_phase(const LaneVec* c, LaneVec* prev, const LaneVec* target, float beta, int F, LaneVec* y) {
  const LaneVec one = LaneVec{} + 1.0f;
  for (int k = 0; k < F; ++k) {
    const LaneVec cr = c[2 * k], ci = c[2 * k + 1];
    LaneVec pr = cr - beta * prev[2 * k];
    const LaneVec pi = ci - beta * prev[2 * k + 1];
    prev[2 * k] = cr;
    prev[2 * k + 1] = ci;
    LaneVec q = pr * pr + pi * pi;
    const auto zero = q == 0.0f;
    pr = zero ? one : pr;
    q = zero ? one : q;
    const LaneVec s = target[k] / lane_sqrt(q);
    y[2 * k] = pr * s;
    y[2 * k + 1] = pi * s;
  }
}

// y = A·C/|C| (plain GL), |C| given.
void keep_phase(const LaneVec* c, const LaneVec* mag, const LaneVec* target, int F, LaneVec* y) {
  const LaneVec one = LaneVec{} + 1.0f;
  for (int k = 0; k < F; ++k) {
    const auto zero = mag[k] == 0.0f;
    const LaneVec s = target[k] / (zero ? one : mag[k]);
    y[2 * k] = (zero ? one : c[2 * k]) * s;
    y[2 * k + 1] = c[2 * k + 1] * s;
  }
}

// Σ_k w_k·(|C| − A)² and Σ_k w_k·A² over the first count lanes, w = 1 at DC and Nyquist, else 2.
void spectral_sums(const LaneVec* mag, const LaneVec* target, int F, int count, double& dist2, double& target2) {
  for (int k = 0; k < F; ++k) {
    const double w = (k == 0 || k == F - 1) ? 1.0 : 2.0;
    for (int j = 0; j < count; ++j) {
      const double d = double(mag[k][j]) - target[k][j];
      dist2 += w * d * d;
      target2 += w * double(target[k][j]) * target[k][j];
    }
  }
}

// R x T columns -> ceil(T / W) batches of R vectors; lanes past T are zero.
void to_batches(const Eigen::MatrixXf& a, LaneBuffer& out) {
  const Eigen::Index R = a.rows(), T = a.cols();
  out.assign(std::size_t((T + W - 1) / W * R), LaneVec{});
  for (Eigen::Index t = 0; t < T; ++t) {
    LaneVec* dst = out.data() + (t / W) * R;
    const float* col = a.col(t).data();
    for (Eigen::Index r = 0; r < R; ++r) dst[r][t % W] = col[r];
  }
}

}  // namespace

GriffinLim::GriffinLim(const AudioConfig& cfg)
    : stft_(cfg),
      fft_(stft_.n_fft()),
      synth_window_(std::size_t(stft_.n_fft())),
      frames_(std::size_t(stft_.n_fft())),
      spec_(2 * std::size_t(stft_.n_bins())),
      mag_(std::size_t(stft_.n_bins())),
      target_(std::size_t(stft_.n_bins())),
      corr_(std::size_t(stft_.n_bins())) {
  for (int n = 0; n < stft_.n_fft(); ++n)
    synth_window_[std::size_t(n)] = float(double(stft_.window()[std::size_t(n)]) / stft_.n_fft());
}

std::size_t GriffinLim::checked_length(Eigen::Index frames, std::size_t length) const {
  if (frames < 1) throw Error("griffin-lim needs at least one frame");
  const std::size_t hop = std::size_t(stft_.hop_length());
  if (length == 0) length = std::max<std::size_t>(1, hop * std::size_t(frames - 1));
  if (stft_.n_frames(length) != std::size_t(frames))
    throw Error("griffin-lim: " + std::to_string(frames) + " frames need a length in [" +
                std::to_string(hop * std::size_t(frames - 1)) + ", " + std::to_string(hop * std::size_t(frames)) +
                "), got " + std::to_string(length));
  return length;
}

std::vector<float> GriffinLim::run(const Eigen::MatrixXf& magnitude, std::size_t length,
                                   GriffinLimVariant variant, const GriffinLimOptions& opt) {
  if (variant == GriffinLimVariant::mel_consistent)
    throw Error("griffin-lim variant mel_consistent needs a target mel (use run_mel_consistent)");
  if (magnitude.rows() != stft_.n_bins())
    throw Error("griffin-lim expects " + std::to_string(stft_.n_bins()) + " bins, got " +
                std::to_string(magnitude.rows()));
  const double alpha = variant == GriffinLimVariant::plain ? 0.0 : opt.momentum;
  return iterate(magnitude, nullptr, nullptr, length, alpha, opt);
}

std::vector<float> GriffinLim::run_mel_consistent(const Eigen::MatrixXf& mel, const Eigen::MatrixXf& start,
                                                  const MelFilterbank& fb, std::size_t length,
                                                  const GriffinLimOptions& opt) {
  if (fb.n_bins() != stft_.n_bins() || start.rows() != stft_.n_bins() || mel.rows() != fb.n_mels() ||
      mel.cols() != start.cols())
    throw Error("griffin-lim: mel (" + std::to_string(mel.rows()) + " x " + std::to_string(mel.cols()) +
                ") and start magnitude (" + std::to_string(start.rows()) + " x " +
                std::to_string(start.cols()) + ") do not match the filterbank (" +
                std::to_string(fb.n_mels()) + " mels, " + std::to_string(fb.n_bins()) + " bins)");
  mel_res_.resize(std::size_t(fb.n_mels()));
  mel_g_.resize(std::size_t(fb.n_mels()));
  return iterate(start, &mel, &fb, length, opt.momentum, opt);
}

void GriffinLim::overlap_add(std::size_t T) {
  const std::size_t hop = std::size_t(stft_.hop_length());
  const int F = stft_.n_bins(), first = stft_.window_offset(), last = first + stft_.win_length();
  ola_.assign(std::size_t(stft_.n_fft()) + hop * (T - 1), 0.0f);
  for (std::size_t t0 = 0; t0 < T; t0 += W) {
    const int count = int(std::min<std::size_t>(W, T - t0));
    fft_.inverse(y_.data() + t0 / W * 2 * std::size_t(F), frames_.data());
    overlap_add_frames(frames_.data(), synth_window_.data(), first, last, hop, count, ola_.data() + t0 * hop);
  }
}

std::vector<float> GriffinLim::iterate(const Eigen::MatrixXf& start, const Eigen::MatrixXf* mel,
                                       const MelFilterbank* fb, std::size_t length, double momentum,
                                       const GriffinLimOptions& opt) {
  if (opt.iters < 0) throw Error("griffin-lim iterations must be >= 0, got " + std::to_string(opt.iters));
  if (!(momentum >= 0.0))
    throw Error("griffin-lim momentum must be >= 0, got " + std::to_string(momentum));
  const Eigen::Index T = start.cols();
  const int F = stft_.n_bins(), N = stft_.n_fft(), M = mel ? fb->n_mels() : 0;
  length = checked_length(T, length);
  const std::size_t hop = std::size_t(stft_.hop_length()), pad = std::size_t(stft_.pad());
  const int first = stft_.window_offset(), last = first + stft_.win_length();
  const float beta = float(momentum / (1.0 + momentum));
  const bool use_momentum = beta > 0.0f, stats = bool(opt.on_iteration);
  const std::size_t batches = std::size_t((T + W - 1) / W), F2 = 2 * std::size_t(F);

  // Targets in the batch layout; Y₀ = A₀·e^{iφ₀}; C₀ = 0.
  to_batches(start, start_);
  if (mel) to_batches(*mel, mel_);
  y_.assign(batches * F2, LaneVec{});
  if (opt.init == PhaseInit::zero) {
    for (std::size_t b = 0; b < batches; ++b)
      for (int k = 0; k < F; ++k) y_[b * F2 + 2 * std::size_t(k)] = start_[b * std::size_t(F) + std::size_t(k)];
  } else {
    std::mt19937 rng(opt.seed);
    for (Eigen::Index t = 0; t < T; ++t)
      for (int k = 0; k < F; ++k) {
        const double phi = 2.0 * std::numbers::pi * (double(rng()) / 4294967296.0);
        const std::complex<float> v = std::polar(start(k, t), float(phi));
        LaneVec* y = y_.data() + std::size_t(t / W) * F2 + 2 * std::size_t(k);
        y[0][t % W] = v.real();
        y[1][t % W] = v.imag();
      }
  }
  if (use_momentum) c_prev_.assign(batches * F2, LaneVec{});
  padded_.resize(length + 2 * pad);

  for (int it = 1; it <= opt.iters; ++it) {
    // Consistency projection, first half: y = ISTFT(Y), then reflect-pad y for re-analysis.
    overlap_add(std::size_t(T));
    stft_.normalize_ola(ola_, std::size_t(T), length, IstftEdges::fold, padded_.data() + pad);
    for (std::size_t i = 0; i < pad; ++i) padded_[i] = padded_[pad + stft_.reflect_index(std::ptrdiff_t(i), length)];
    for (std::size_t i = pad + length; i < padded_.size(); ++i)
      padded_[i] = padded_[pad + stft_.reflect_index(std::ptrdiff_t(i), length)];

    double dist2 = 0.0, target2 = 0.0, mel_err2 = 0.0, mel2 = 0.0;
    for (std::size_t b = 0; b < batches; ++b) {
      const std::size_t t0 = b * W;
      const int count = int(std::min<std::size_t>(W, std::size_t(T) - t0));
      gather_frames(padded_.data() + t0 * hop, hop, count, stft_.window().data(), first, last, N, frames_.data());
      fft_.forward(frames_.data(), spec_.data());  // Cₙ
      // |C| is needed by the mel correction, plain GL's phase and the figures only.
      if (mel || !use_momentum || stats) magnitudes(spec_.data(), F, mag_.data());
      const LaneVec* target = start_.data() + b * std::size_t(F);
      if (mel) {
        const LaneVec* mel_b = mel_.data() + b * std::size_t(M);
        mel_correct(*fb, mag_.data(), mel_b, mel_res_.data(), mel_g_.data(), corr_.data(), target_.data());
        target = target_.data();
        if (stats)
          for (int m = 0; m < M; ++m)
            for (int j = 0; j < count; ++j) {
              mel_err2 += double(mel_res_[std::size_t(m)][j]) * mel_res_[std::size_t(m)][j];
              mel2 += double(mel_b[m][j]) * mel_b[m][j];
            }
      }
      if (stats) spectral_sums(mag_.data(), target, F, count, dist2, target2);

      // Momentum and phase: Yₙ = Aₙ·Pₙ/|Pₙ|.
      LaneVec* y = y_.data() + b * F2;
      if (use_momentum)
        momentum_phase(spec_.data(), c_prev_.data() + b * F2, target, beta, F, y);
      else
        keep_phase(spec_.data(), mag_.data(), target, F, y);
    }
    if (stats) {
      GriffinLimStep s;
      s.iter = it;
      s.total = opt.iters;
      s.spectral_distance = target2 > 0.0 ? std::sqrt(dist2 / target2) : std::sqrt(dist2);
      s.mel_distance = mel ? (mel2 > 0.0 ? std::sqrt(mel_err2 / mel2) : std::sqrt(mel_err2)) : 0.0;
      opt.on_iteration(s);
    }
    if (opt.progress) opt.progress(it, opt.iters);
  }

  std::vector<float> out(length);
  overlap_add(std::size_t(T));
  stft_.normalize_ola(ola_, std::size_t(T), length, IstftEdges::fold, out.data());
  return out;
}

std::vector<float> griffin_lim(const AudioConfig& cfg, const Eigen::MatrixXf& magnitude,
                               std::size_t length, GriffinLimVariant variant, int iters,
                               const std::function<void(const GriffinLimStep&)>& on_iteration) {
  GriffinLimOptions opt;
  opt.iters = iters;
  opt.momentum = cfg.momentum;
  opt.on_iteration = on_iteration;
  GriffinLim gl(cfg);
  return gl.run(magnitude, length, variant, opt);
}

}  // namespace tessera::audio
