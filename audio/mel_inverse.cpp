// mel_inverse.cpp — clipped pseudo-inverse, projected-gradient NNLS, and the inversion dispatch.
// M mels, F bins, T frames.
#include "audio/mel_inverse.h"

#include <algorithm>
#include <string>

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
  const int F = fb.n_bins(), M = fb.n_mels();
  const float step = fb.lipschitz() > 0.0 ? float(1.0 / fb.lipschitz()) : 0.0f;
  Eigen::MatrixXf a = start;
  std::vector<float> r(static_cast<std::size_t>(M)), grad(static_cast<std::size_t>(F));
  // Frames are independent: all iterations of one frame run on data that stays in cache.
  for (Eigen::Index t = 0; t < mel.cols(); ++t) {
    float* at = a.col(t).data();
    const float* mt = mel.col(t).data();
    for (int it = 0; it < iters; ++it) {
      fb.apply(at, r.data());
      for (int m = 0; m < M; ++m) r[std::size_t(m)] -= mt[m];
      fb.apply_transpose(r.data(), grad.data());
      for (int k = 0; k < F; ++k) at[k] = std::max(at[k] - step * grad[std::size_t(k)], 0.0f);
    }
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
