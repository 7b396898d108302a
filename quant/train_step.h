// train_step.h — one optimiser step of the tokenizer on a batch, the unit that both the
// trainer and the benchmark run. B batch, M mels, T frames, D latent dims, L = T / hop.
//   z  = encoder(x)                    [B, D, L]
//   zq = codebooks(z, depth)           straight-through; commitment (+ codebook) loss
//   y  = decoder(zq)                   [B, M, T]
//   loss = l1·mean|y − x| + l2·mean(y − x)² + commitment (+ codebook loss in loss mode)
//   backward in reverse order, clip the global gradient norm, Adam.
#pragma once
#include <memory>

#include "quant/adam.h"
#include "quant/tensor.h"
#include "quant/tokenizer.h"
#include "quant/train_config.h"

namespace tessera::quant {

struct StepResult {
  double loss = 0, recon = 0, commitment = 0, grad_norm = 0;
};

class TrainStep {
 public:
  TrainStep(Tokenizer& model, const TrainConfig& cfg);

  // One step on x [B, M, T] (normalised log-mel) at `depth` with learning rate `lr`.
  // Throws tessera::Error when the loss or the gradient norm is not finite (nothing is
  // applied to the weights then).
  StepResult run(const Tensor& x, int depth, double lr);

  Adam& adam() { return adam_; }
  Adam* codebook_adam() { return codebook_adam_.get(); }

 private:
  Tokenizer* m_;
  TrainConfig cfg_;
  Adam adam_;
  std::unique_ptr<Adam> codebook_adam_;  // codebooks learned by the codebook loss
  Tensor z_, zq_, y_, dy_, dzq_, dz_;
};

AdamConfig adam_config(const TrainConfig& t);

}  // namespace tessera::quant
