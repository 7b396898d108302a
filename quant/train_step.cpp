// train_step.cpp — forward, loss, backward, clipping and Adam for one batch.
#include "quant/train_step.h"

#include <cmath>
#include <string>

#include "audio/error.h"
#include "quant/grad_clip.h"

namespace tessera::quant {

AdamConfig adam_config(const TrainConfig& t) {
  AdamConfig a;
  a.beta1 = t.beta1;
  a.beta2 = t.beta2;
  a.eps = t.adam_epsilon;
  a.weight_decay = t.weight_decay;
  a.decoupled = true;
  return a;
}

TrainStep::TrainStep(Tokenizer& model, const TrainConfig& cfg)
    : m_(&model), cfg_(cfg), adam_(model.slab().count(), adam_config(cfg)) {
  if (model.config().codebooks.learning == CodebookConfig::Learning::loss)
    codebook_adam_ = std::make_unique<Adam>(model.codebooks().codebooks().size(), adam_config(cfg));
}

StepResult TrainStep::run(const Tensor& x, int depth, double lr) {
  Tokenizer& m = *m_;
  ParamSlab& slab = m.slab();
  ResidualCodebooks& rvq = m.codebooks();
  const bool loss_mode = codebook_adam_ != nullptr;
  slab.zero_grad();
  if (loss_mode) rvq.zero_grad();

  m.encoder().forward(x, z_, slab, /*train=*/true);
  zq_.resize(z_.B(), z_.C(), z_.T());
  const QuantLosses q = rvq.forward(z_.all(), depth, zq_.all(), ResidualCodebooks::Pass::train);
  m.decoder().forward(zq_, y_, slab, /*train=*/true);

  // Reconstruction loss and its gradient: the seed of the backward pass.
  const double n = double(x.size());
  const float l1 = float(cfg_.l1_weight / n), l2 = float(2.0 * cfg_.l2_weight / n);
  dy_.resize(y_.B(), y_.C(), y_.T());
  double sum_abs = 0, sum_sq = 0;
  const float* yp = y_.data();
  const float* xp = x.data();
  float* dy = dy_.data();
  for (std::size_t i = 0; i < x.size(); ++i) {
    const float e = yp[i] - xp[i];
    sum_abs += std::fabs(e);
    sum_sq += double(e) * e;
    dy[i] = l1 * float((e > 0) - (e < 0)) + l2 * e;
  }
  StepResult r;
  r.recon = cfg_.l1_weight * sum_abs / n + cfg_.l2_weight * sum_sq / n;
  r.commitment = q.commitment;
  r.loss = r.recon + q.commitment + (loss_mode ? q.codebook : 0.0);
  if (!std::isfinite(r.loss))
    throw Error("training diverged (the loss is " + std::to_string(r.loss) +
                "); lower train.learning_rate or check the corpus");

  m.decoder().backward(dy_, dzq_, slab);
  dz_.resize(z_.B(), z_.C(), z_.T());
  dz_.zero();
  rvq.backward(dzq_.all(), dz_.all(), 1.0f, loss_mode ? 1.0f : 0.0f);
  m.encoder().backward(dz_, slab);

  r.grad_norm = cfg_.grad_clip > 0 ? clip_grad_norm(slab.grads(), slab.count(), cfg_.grad_clip)
                                   : grad_norm(slab.grads(), slab.count());
  if (!std::isfinite(r.grad_norm))
    throw Error("training diverged (the gradient norm is not finite); lower train.learning_rate or check the corpus");
  adam_.step(slab.params(), slab.grads(), float(lr), &m.pool());
  if (codebook_adam_) codebook_adam_->step(rvq.codebooks().data(), rvq.codebook_grads().data(), float(lr));
  return r;
}

}  // namespace tessera::quant
