// mel_inverse.cpp — clipped pseudo-inverse, projected-gradient NNLS, and the inversion dispatch.
// M mels, F bins, T frames, W frames per SIMD batch.
#include "audio/mel_inverse.h"

#include <algorithm>
#include <string>

#include "audio/batch_fft.h"
#include "audio/error.h"

namespace tessera::audio {

static void check_mel(const MelFilterbank& fb, const Eigen::MatrixXf& mel) {
  if (mel.rows() != fb.n_mels())
    throw Error("expected " + std::to_string(fb.n_mels()) + " mel bands, got " + std::to_string(mel.rows()));
}

Eigen::MatrixXf pinv_start(const MelFilterbank& fb, const Eigen::MatrixXf& mel) {
  check_mel(fb, mel);
  // M⁺·mel as Mᵀ·(G·mel): one M x M product for all frames, then the sparse Mᵀ.
  const Eigen::MatrixXf g = fb.gram_pinv() * mel;
  Eigen::MatrixXf a(fb.n_bins(), mel.cols());
  for (Eigen::Index t = 0; t < mel.cols(); ++t) fb.apply_transpose(g.col(t).data(), a.col(t).data());
  return a.cwiseMax(0.0f);
}

Eigen::MatrixXf nnls_magnitude(const MelFilterbank& fb, const Eigen::MatrixXf& mel,
                               const Eigen::MatrixXf& start, int iters) {
  check_mel(fb, mel);
  if (start.rows() != fb.n_bins() || start.cols() != mel.cols())
    throw Error("nnls start must be " + std::to_string(fb.n_bins()) + " x " + std::to_string(mel.cols()) +
                ", got " + std::to_string(start.rows()) + " x " + std::to_string(start.cols()));
  if (iters < 0) throw Error("nnls_iters must be >= 0, got " + std::to_string(iters));
  const int F = fb.n_bins(), M = fb.n_mels(), W = kFftLanes;
  const float step = fb.lipschitz() > 0.0 ? float(1.0 / fb.lipschitz()) : 0.0f;
  Eigen::MatrixXf a = start;
  LaneBuffer x(static_cast<std::size_t>(F)), grad(static_cast<std::size_t>(F)), target(static_cast<std::size_t>(M)),
      r(static_cast<std::size_t>(M));
  // Frames are independent: W frames at a time, one per SIMD lane (batch_fft.h), all iterations
  // on data that stays in cache. Lanes past the last frame hold zeros and stay zero.
  for (Eigen::Index t0 = 0; t0 < mel.cols(); t0 += W) {
    const int count = int(std::min<Eigen::Index>(W, mel.cols() - t0));
    std::fill(x.begin(), x.end(), LaneVec{});
    std::fill(target.begin(), target.end(), LaneVec{});
    for (int j = 0; j < count; ++j) {
      for (int k = 0; k < F; ++k) x[std::size_t(k)][j] = a(k, t0 + j);
      for (int m = 0; m < M; ++m) target[std::size_t(m)][j] = mel(m, t0 + j);
    }
    for (int it = 0; it < iters; ++it) {
      for (int m = 0; m < M; ++m) {  // r = M·a − mel (sparse bands)
        const float* w = fb.weights(m);
        const LaneVec* xm = x.data() + fb.first_bin(m);
        LaneVec acc{};
        for (int i = 0, n = fb.band_size(m); i < n; ++i) acc += w[i] * xm[i];
        r[std::size_t(m)] = acc - target[std::size_t(m)];
      }
      std::fill(grad.begin(), grad.end(), LaneVec{});
      for (int m = 0; m < M; ++m) {  // grad = Mᵀ·r
        const float* w = fb.weights(m);
        LaneVec* g = grad.data() + fb.first_bin(m);
        const LaneVec rm = r[std::size_t(m)];
        for (int i = 0, n = fb.band_size(m); i < n; ++i) g[i] += w[i] * rm;
      }
      for (int k = 0; k < F; ++k) {
        const LaneVec v = x[std::size_t(k)] - step * grad[std::size_t(k)];
        x[std::size_t(k)] = v > 0.0f ? v : LaneVec{};
      }
    }
    for (int j = 0; j < count; ++j)
      for (int k = 0; k < F; ++k) a(k, t0 + j) = x[std::size_t(k)][j];
  }
  return a;
}

MelInverter::MelInverter(const AudioConfig& cfg) : cfg_(cfg), fb_(cfg), gl_(cfg) {
  if (cfg.griffin_lim_iters < 0)
    throw Error("griffin_lim_iters must be >= 0, got " + std::to_string(cfg.griffin_lim_iters));
  if (cfg.nnls_iters < 0) throw Error("nnls_iters must be >= 0, got " + std::to_string(cfg.nnls_iters));
  if (!(cfg.momentum >= 0.0)) throw Error("momentum must be >= 0, got " + std::to_string(cfg.momentum));
  opt_.iters = cfg.griffin_lim_iters;
  opt_.momentum = cfg.momentum;
  opt_.init = PhaseInit::zero;
}

std::vector<float> MelInverter::invert(const Eigen::MatrixXf& log_mel, std::size_t length,
                                       const std::function<void(int, int)>& progress) {
  check_mel(fb_, log_mel);
  const Eigen::MatrixXf mel = log_mel.array().exp().matrix();
  const Eigen::MatrixXf a0 = pinv_start(fb_, mel);
  GriffinLimOptions opt = opt_;
  opt.progress = progress;
  switch (cfg_.inversion) {
    case Inversion::mel_consistent: return gl_.run_mel_consistent(mel, a0, fb_, length, opt);
    case Inversion::fast: return gl_.run(a0, length, GriffinLimVariant::fast, opt);
    case Inversion::plain: return gl_.run(a0, length, GriffinLimVariant::plain, opt);
    case Inversion::nnls:
      return gl_.run(nnls_magnitude(fb_, mel, a0, cfg_.nnls_iters), length, GriffinLimVariant::fast, opt);
  }
  throw Error(std::string("unknown inversion method ") + to_string(cfg_.inversion));
}

std::vector<float> invert_log_mel(const AudioConfig& cfg, const Eigen::MatrixXf& log_mel,
                                  std::size_t length, const std::function<void(int, int)>& progress) {
  return MelInverter(cfg).invert(log_mel, length, progress);
}

}  // namespace tessera::audio
