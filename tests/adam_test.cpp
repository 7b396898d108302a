// adam_test.cpp — Adam/AdamW, gradient clipping and the learning-rate schedule against torch.
// Reference values: tests/fixtures/adam_torch.json from make_adam_fixture.py (torch 1.13).
#include <doctest/doctest.h>

#include <cmath>
#include <fstream>
#include <limits>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "audio/error.h"
#include "quant/adam.h"
#include "quant/float_buffer.h"
#include "quant/grad_clip.h"
#include "quant/lr_schedule.h"

using namespace tessera::quant;
using tessera::Error;
using Vec = std::vector<float>;

namespace {

const nlohmann::json& fixture() {
  static const nlohmann::json j = [] {
    std::ifstream f(std::string(TESSERA_FIXTURES) + "/adam_torch.json");
    REQUIRE(f);
    return nlohmann::json::parse(f);
  }();
  return j;
}

// Largest violation of |got − ref| <= atol + rtol·|ref|, as a multiple of the allowance.
double worst(const Vec& got, const Vec& ref, double atol, double rtol) {
  REQUIRE(got.size() == ref.size());
  double w = 0;
  for (std::size_t i = 0; i < got.size(); ++i)
    w = std::max(w, std::abs(double(got[i]) - ref[i]) / (atol + rtol * std::abs(double(ref[i]))));
  return w;
}

AdamConfig config_of(const nlohmann::json& c, bool decoupled) {
  AdamConfig cfg;
  cfg.beta1 = c["betas"][0];
  cfg.beta2 = c["betas"][1];
  cfg.eps = c["eps"];
  cfg.weight_decay = c.value("weight_decay", 0.0);
  cfg.decoupled = decoupled;
  return cfg;
}

void check_against_torch(const char* key, bool decoupled) {
  const auto& fx = fixture();
  const auto& ref = fx[key];
  Vec params = fx["initial"].get<Vec>();
  Adam opt(params.size(), config_of(ref["config"], decoupled));
  double w_all = 0;
  for (std::size_t s = 0; s < fx["lrs"].size(); ++s) {
    CAPTURE(s);
    const Vec grads = fx["grads"][s].get<Vec>();
    opt.step(params.data(), grads.data(), fx["lrs"][s].get<float>());
    // Parameters after every step: atol 1e-7 + rtol 1e-6 (float32 arithmetic on both sides).
    const double w = worst(params, ref["params"][s].get<Vec>(), 1e-7, 1e-6);
    CHECK(w <= 1.0);
    w_all = std::max(w_all, w);
  }
  MESSAGE(std::string(key) << ": worst |error| / (1e-7 + 1e-6·|torch|) over 5 steps = " << w_all);
  CHECK(opt.steps() == ref["step"].get<std::int64_t>());
  const Vec m(opt.m().begin(), opt.m().end()), v(opt.v().begin(), opt.v().end());
  // Moments relative to their own size: v spans 1e-19 (tiny gradients) to O(10).
  CHECK(worst(m, ref["m"].get<Vec>(), 1e-20, 1e-6) <= 1.0);
  CHECK(worst(v, ref["v"].get<Vec>(), 1e-30, 1e-6) <= 1.0);
}

}  // namespace

TEST_CASE("adam matches torch.optim.Adam over five steps") {
  check_against_torch("adam", false);
}

TEST_CASE("adamw (decoupled weight decay) matches torch.optim.AdamW") {
  check_against_torch("adamw", true);
}

TEST_CASE("adam with L2 weight decay matches torch.optim.Adam(weight_decay)") {
  check_against_torch("adam_l2", false);
}

TEST_CASE("the first bias-corrected step moves every weight by about lr") {
  // Kingma & Ba 2015, section 2.1: with bias correction the first step is lr·g/(|g| + eps),
  // so |Δθ| ≈ lr whenever |g| >> eps, whatever the gradient's scale.
  Vec p = {0.5f, -1.0f, 2.0f, 0.0f};
  const Vec g = {1e-3f, -50.0f, 3.0f, -1e-4f};
  const Vec p0 = p;
  Adam opt(p.size());
  opt.step(p.data(), g.data(), 0.01f);
  for (std::size_t i = 0; i < p.size(); ++i) {
    const double expected = 0.01 * std::abs(g[i]) / (std::abs(g[i]) + 1e-8);
    CHECK(std::abs(p0[i] - p[i]) == doctest::Approx(expected).epsilon(1e-5));
    CHECK((p[i] < p0[i]) == (g[i] > 0));   // moves against the gradient
  }
}

TEST_CASE("restoring moments and step count resumes exactly") {
  const auto& fx = fixture();
  const AdamConfig cfg = config_of(fx["adamw"]["config"], true);
  Vec a = fx["initial"].get<Vec>(), b = a;
  Adam full(a.size(), cfg), first(b.size(), cfg);
  for (int s = 0; s < 3; ++s) {
    const Vec g = fx["grads"][s].get<Vec>();
    full.step(a.data(), g.data(), 0.02f);
    first.step(b.data(), g.data(), 0.02f);
  }
  Adam resumed(b.size(), cfg);   // as after loading a checkpoint
  resumed.restore(first.steps(), first.m(), first.v());
  for (int s = 3; s < 5; ++s) {
    const Vec g = fx["grads"][s].get<Vec>();
    full.step(a.data(), g.data(), 0.02f);
    resumed.step(b.data(), g.data(), 0.02f);
  }
  CHECK(a == b);   // bit for bit
  CHECK(resumed.steps() == 5);
  const Vec short_m(3, 0.0f);
  CHECK_THROWS_WITH_AS(resumed.restore(2, short_m, short_m),
                       "adam state has 3 and 3 moments, the model has 25 parameters", Error);
  CHECK_THROWS_AS(resumed.restore(-1, full.m(), full.v()), Error);
}

TEST_CASE("adam split over a thread pool gives the same bits as one thread") {
  // Each element's update is independent (Kingma & Ba 2015, Algorithm 1), so splitting the
  // parameters over lanes must not change a single bit; 3 lanes over 10,001 values cut
  // through the middle of the 2048-value blocks' range.
  // The buffers are allocated as the parameter slab's are (FloatBuffer, float_buffer.h):
  // with std::vector's 16-byte alignment the two copies could start at different offsets
  // from a 64-byte packet, and Eigen's scalar head then rounds a few elements differently
  // in an AVX-512 build, whatever the lanes do.
  const std::size_t n = 10001;
  FloatBuffer one(n), split(n), g(n);
  for (std::size_t i = 0; i < n; ++i) {
    one[i] = split[i] = std::sin(0.37f * float(i));
    g[i] = std::cos(0.11f * float(i)) * (i % 7 == 0 ? 1e-4f : 1.0f);
  }
  AdamConfig cfg;
  cfg.weight_decay = 0.01;
  cfg.decoupled = true;
  Adam a(n, cfg), b(n, cfg);
  tessera::quant::ThreadPool pool(3);
  for (int s = 0; s < 3; ++s) {
    a.step(one.data(), g.data(), 0.01f);
    b.step(split.data(), g.data(), 0.01f, &pool);
  }
  CHECK(one == split);
  CHECK(one[5] != std::sin(0.37f * 5.0f));   // the steps did move the weights
}

TEST_CASE("adam rejects bad settings") {
  AdamConfig c;
  c.beta1 = 1.0;
  CHECK_THROWS_WITH_AS(Adam(4, c), "adam: beta1 must be in [0, 1), got 1.000000", Error);
  c = {};
  c.eps = 0;
  CHECK_THROWS_AS(Adam(4, c), Error);
  c = {};
  c.weight_decay = -0.1;
  CHECK_THROWS_AS(Adam(4, c), Error);
}

TEST_CASE("gradient clipping matches torch.nn.utils.clip_grad_norm_") {
  for (const auto& c : fixture()["clip"]) {
    Vec g = c["grads"].get<Vec>();
    const double max_norm = c["max_norm"];
    CAPTURE(max_norm);
    const double norm = clip_grad_norm(g.data(), g.size(), max_norm);
    // torch sums in float32, we in double: rtol 1e-6.
    CHECK(norm == doctest::Approx(c["norm"].get<double>()).epsilon(1e-6));
    CHECK(worst(g, c["clipped"].get<Vec>(), 1e-9, 1e-6) <= 1.0);
    if (norm < max_norm) CHECK(g == c["grads"].get<Vec>());   // below the limit: untouched
    else CHECK(grad_norm(g.data(), g.size()) == doctest::Approx(max_norm).epsilon(1e-5));
  }
}

TEST_CASE("gradient norm: double accumulation, non-finite gradients, bad limits") {
  // 10^6 copies of 0.1f: the norm is 1000·0.1f exactly in real arithmetic; a float32
  // running sum drifts by ~1e-4 relative or more; double summation stays near 1e-11.
  Vec g(1'000'000, 0.1f);
  CHECK(grad_norm(g.data(), g.size()) == doctest::Approx(1000.0 * double(0.1f)).epsilon(1e-9));
  Vec bad = {1.0f, std::numeric_limits<float>::infinity(), 2.0f};
  const Vec before = bad;
  CHECK(std::isinf(clip_grad_norm(bad.data(), bad.size(), 1.0)));
  CHECK(bad == before);   // left for the caller to skip the step
  CHECK_THROWS_WITH_AS(clip_grad_norm(g.data(), g.size(), 0.0),
                       "gradient clipping: max_norm must be positive, got 0.000000", Error);
  CHECK(clip_grad_norm(g.data(), 0, 1.0) == 0.0);
}

TEST_CASE("warm-up + cosine schedule matches torch's LinearLR and CosineAnnealingLR") {
  for (const auto& c : fixture()["schedule"]) {
    const LrSchedule s(c["peak"], c["warmup"], c["total"], c["floor"]);
    const auto closed = c["closed_form"].get<std::vector<double>>();
    const auto torch_lr = c["torch"].get<std::vector<double>>();
    CAPTURE(s.warmup_steps());
    // The formula of lr_schedule.h evaluated in Python: same double arithmetic.
    for (std::size_t t = 0; t < closed.size(); ++t)
      CHECK(s.at(std::int64_t(t)) == doctest::Approx(closed[t]).epsilon(1e-12));
    // torch's schedulers (CosineAnnealingLR updates recursively): rtol 1e-9.
    REQUIRE(torch_lr.size() == std::size_t(s.total_steps() + 1));
    for (std::size_t t = 0; t < torch_lr.size(); ++t)
      CHECK(s.at(std::int64_t(t)) == doctest::Approx(torch_lr[t]).epsilon(1e-9));
  }
  const LrSchedule s(3e-3, 5, 25, 1e-4);
  CHECK(s.at(4) == 3e-3);     // warm-up ends at the peak
  CHECK(s.at(5) == 3e-3);     // cosine starts there
  CHECK(s.at(15) == doctest::Approx(0.5 * (3e-3 + 1e-4)).epsilon(1e-12));   // half-way: mean
  CHECK(s.at(1000) == 1e-4);  // after the end: the floor
}

TEST_CASE("schedule rejects bad settings") {
  CHECK_THROWS_WITH_AS(LrSchedule(1e-3, 2000, 1000),
                       "learning-rate schedule: warm-up steps must be in [0, total steps = 1000], got 2000", Error);
  CHECK_THROWS_AS(LrSchedule(0.0, 0, 10), Error);
  CHECK_THROWS_AS(LrSchedule(1e-3, 0, 10, 2e-3), Error);
  CHECK_THROWS_AS(LrSchedule(1e-3, 0, 0), Error);
}
