// lr_schedule.cpp — warm-up + cosine decay (formula in lr_schedule.h).
#include "quant/lr_schedule.h"

#include <cmath>
#include <numbers>
#include <string>

#include "audio/error.h"

namespace tessera::quant {

LrSchedule::LrSchedule(double peak, std::int64_t warmup_steps, std::int64_t total_steps, double floor)
    : peak_(peak), floor_(floor), warmup_(warmup_steps), total_(total_steps) {
  const std::string pre = "learning-rate schedule: ";
  if (!(peak > 0) || !std::isfinite(peak))
    throw Error(pre + "peak learning rate must be positive, got " + std::to_string(peak));
  if (!(floor >= 0 && floor <= peak))
    throw Error(pre + "floor must be in [0, peak = " + std::to_string(peak) + "], got " + std::to_string(floor));
  if (total_steps < 1) throw Error(pre + "total steps must be >= 1, got " + std::to_string(total_steps));
  if (warmup_steps < 0 || warmup_steps > total_steps)
    throw Error(pre + "warm-up steps must be in [0, total steps = " + std::to_string(total_steps) +
                "], got " + std::to_string(warmup_steps));
}

double LrSchedule::at(std::int64_t t) const {
  if (t < 0) t = 0;
  if (t < warmup_) return peak_ * double(t + 1) / double(warmup_);
  if (t >= total_) return floor_;
  const double progress = double(t - warmup_) / double(total_ - warmup_);
  return floor_ + (peak_ - floor_) * 0.5 * (1.0 + std::cos(std::numbers::pi * progress));
}

}  // namespace tessera::quant
