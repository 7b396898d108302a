// lr_schedule.h — learning rate per update: linear warm-up, then cosine decay to a floor.
// With t the 0-based index of the update, W warm-up steps, T total steps, peak P, floor F:
//   t < W:       lr = P · (t + 1) / W                              (never 0 on the first step)
//   W <= t < T:  lr = F + (P − F) · (1 + cos(π · (t − W) / (T − W))) / 2
//   t >= T:      lr = F
// The cosine is the annealing of SGDR (Loshchilov & Hutter 2017, eq. 5) without restarts;
// it equals torch.optim.lr_scheduler.CosineAnnealingLR(T_max = T − W, eta_min = F) shifted
// by W steps, and the warm-up equals LinearLR(start_factor = 1/W, total_iters = W − 1).
#pragma once
#include <cstdint>

namespace tessera::quant {

class LrSchedule {
 public:
  // Throws tessera::Error unless 0 < peak, 0 <= floor <= peak, 0 <= warmup <= total, total >= 1.
  LrSchedule(double peak, std::int64_t warmup_steps, std::int64_t total_steps, double floor = 0.0);

  double at(std::int64_t t) const;   // t: 0-based update index; t < 0 counts as 0

  double peak() const { return peak_; }
  double floor() const { return floor_; }
  std::int64_t warmup_steps() const { return warmup_; }
  std::int64_t total_steps() const { return total_; }

 private:
  double peak_, floor_;
  std::int64_t warmup_, total_;
};

}  // namespace tessera::quant
