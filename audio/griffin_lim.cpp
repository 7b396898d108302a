// griffin_lim.cpp — the Griffin-Lim iteration loop: OLA, re-analysis, magnitude, momentum, phase.
// F bins, M mels, T frames, L samples, N = n_fft.
#include "audio/griffin_lim.h"

#include <algorithm>
#include <cmath>
#include <numbers>
#include <random>
#include <string>

#include "audio/error.h"

namespace tessera::audio {

namespace {
// The inner loops over bins work on interleaved re/im floats through non-aliasing pointers so
// that the compiler vectorises them; square roots go through Eigen (std::sqrt's errno path
// would block vectorisation). A bin whose phase is undefined (zero) gets phase 0.

// y = A·P/|P| with P = C − β·prev; prev ← C. p and s hold 2F and F scratch values.
void momentum_phase(const std::complex<float>* c, std::complex<float>* prev, const float* target,
                    float beta, int F, float* p, float* s, std::complex<float>* y) {
  const float* __restrict cr = reinterpret_cast<const float*>(c);
  float* __restrict pr = reinterpret_cast<float*>(prev);
  float* __restrict pp = p;
  float* __restrict n2 = s;
  for (int k = 0; k < F; ++k) {
    const float p0 = cr[2 * k] - beta * pr[2 * k], p1 = cr[2 * k + 1] - beta * pr[2 * k + 1];
    const float q = p0 * p0 + p1 * p1;
    const bool zero = q == 0.0f;
    pp[2 * k] = zero ? 1.0f : p0;
    pp[2 * k + 1] = p1;
    n2[k] = zero ? 1.0f : q;
  }
  std::copy(cr, cr + 2 * F, pr);
  Eigen::Map<Eigen::ArrayXf> scale(s, F);
  scale = Eigen::Map<const Eigen::ArrayXf>(target, F) / scale.sqrt();
  float* __restrict yr = reinterpret_cast<float*>(y);
  const float* __restrict sc = s;
  for (int k = 0; k < F; ++k) {
    yr[2 * k] = pp[2 * k] * sc[k];
    yr[2 * k + 1] = pp[2 * k + 1] * sc[k];
  }
}

// y = A·C/|C| (plain GL), |C| given; p and s as above.
void keep_phase(const std::complex<float>* c, const float* mag, const float* target, int F,
                float* p, float* s, std::complex<float>* y) {
  const float* __restrict cr = reinterpret_cast<const float*>(c);
  const float* __restrict m = mag;
  float* __restrict pp = p;
  float* __restrict d = s;
  for (int k = 0; k < F; ++k) {
    const bool zero = m[k] == 0.0f;
    pp[2 * k] = zero ? 1.0f : cr[2 * k];
    pp[2 * k + 1] = cr[2 * k + 1];
    d[k] = zero ? 1.0f : m[k];
  }
  Eigen::Map<Eigen::ArrayXf> scale(s, F);
  scale = Eigen::Map<const Eigen::ArrayXf>(target, F) / scale;
  float* __restrict yr = reinterpret_cast<float*>(y);
  const float* __restrict sc = s;
  for (int k = 0; k < F; ++k) {
    yr[2 * k] = pp[2 * k] * sc[k];
    yr[2 * k + 1] = pp[2 * k + 1] * sc[k];
  }
}
}  // namespace

GriffinLim::GriffinLim(const AudioConfig& cfg)
    : stft_(cfg),
      c_(std::size_t(stft_.n_bins())),
      mag_(std::size_t(stft_.n_bins())),
      target_(std::size_t(stft_.n_bins())),
      corr_(std::size_t(stft_.n_bins())),
      phase_(2 * std::size_t(stft_.n_bins())),
      scale_(std::size_t(stft_.n_bins())) {}

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
  mel_tmp_.resize(std::size_t(fb.n_mels()));
  return iterate(start, &mel, &fb, length, opt.momentum, opt);
}

std::vector<float> GriffinLim::iterate(const Eigen::MatrixXf& start, const Eigen::MatrixXf* mel,
                                       const MelFilterbank* fb, std::size_t length, double momentum,
                                       const GriffinLimOptions& opt) {
  if (opt.iters < 0) throw Error("griffin-lim iterations must be >= 0, got " + std::to_string(opt.iters));
  if (!(momentum >= 0.0))
    throw Error("griffin-lim momentum must be >= 0, got " + std::to_string(momentum));
  const Eigen::Index T = start.cols();
  const int F = stft_.n_bins();
  length = checked_length(T, length);
  const std::size_t hop = std::size_t(stft_.hop_length()), pad = std::size_t(stft_.pad());
  const float beta = float(momentum / (1.0 + momentum));
  const bool use_momentum = beta > 0.0f, stats = bool(opt.on_iteration);

  // Y₀ = A₀·e^{iφ₀}; C₀ = 0.
  y_.resize(F, T);
  if (opt.init == PhaseInit::zero) {
    y_ = start.cast<std::complex<float>>();
  } else {
    std::mt19937 rng(opt.seed);
    for (Eigen::Index t = 0; t < T; ++t)
      for (int k = 0; k < F; ++k) {
        const double phi = 2.0 * std::numbers::pi * (double(rng()) / 4294967296.0);
        y_(k, t) = std::polar(start(k, t), float(phi));
      }
  }
  if (use_momentum) c_prev_.setZero(F, T);
  padded_.resize(length + 2 * pad);

  for (int it = 1; it <= opt.iters; ++it) {
    // Consistency projection, first half: y = ISTFT(Y), then reflect-pad y for re-analysis.
    stft_.overlap_add(y_, ola_);
    stft_.normalize_ola(ola_, std::size_t(T), length, IstftEdges::fold, padded_.data() + pad);
    for (std::size_t i = 0; i < pad; ++i) padded_[i] = padded_[pad + stft_.reflect_index(std::ptrdiff_t(i), length)];
    for (std::size_t i = pad + length; i < padded_.size(); ++i)
      padded_[i] = padded_[pad + stft_.reflect_index(std::ptrdiff_t(i), length)];

    double dist2 = 0.0, target2 = 0.0, mel_err2 = 0.0, mel2 = 0.0;
    for (Eigen::Index t = 0; t < T; ++t) {
      stft_.analyze_frame(padded_.data() + std::size_t(t) * hop, c_.data());  // Cₙ
      // |C| is needed by the mel correction, plain GL's phase and the figures only.
      if (mel || !use_momentum || stats) magnitude(c_.data(), c_.size(), mag_.data());
      const float* target = start.col(t).data();
      if (mel) {
        // Aₙ = max(|C| + M⁺(mel − M|C|), 0)
        const float* m_t = mel->col(t).data();
        fb->apply(mag_.data(), mel_tmp_.data());
        for (int m = 0; m < fb->n_mels(); ++m) mel_res_[std::size_t(m)] = m_t[m] - mel_tmp_[std::size_t(m)];
        if (stats)
          for (int m = 0; m < fb->n_mels(); ++m) {
            mel_err2 += double(mel_res_[std::size_t(m)]) * mel_res_[std::size_t(m)];
            mel2 += double(m_t[m]) * m_t[m];
          }
        fb->apply_pinv(mel_res_.data(), corr_.data(), mel_tmp_.data());
        Eigen::Map<Eigen::ArrayXf>(target_.data(), F) =
            (Eigen::Map<const Eigen::ArrayXf>(mag_.data(), F) + Eigen::Map<const Eigen::ArrayXf>(corr_.data(), F)).max(0.0f);
        target = target_.data();
      }
      if (stats)
        for (int k = 0; k < F; ++k) {
          const double w = (k == 0 || k == F - 1) ? 1.0 : 2.0;
          const double d = double(mag_[std::size_t(k)]) - target[k];
          dist2 += w * d * d;
          target2 += w * double(target[k]) * target[k];
        }

      // Momentum and phase: Yₙ = Aₙ·Pₙ/|Pₙ|.
      if (use_momentum)
        momentum_phase(c_.data(), c_prev_.col(t).data(), target, beta, F, phase_.data(), scale_.data(), y_.col(t).data());
      else
        keep_phase(c_.data(), mag_.data(), target, F, phase_.data(), scale_.data(), y_.col(t).data());
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
  stft_.overlap_add(y_, ola_);
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
