// encoder_decoder_test.cpp — the encoder and decoder: PyTorch end to end (small width),
// shapes and parameter counts of the reference architecture, a finite-difference check
// through both, thread-count determinism, time-split inference and variable T.
// B batch, M mels, C channels, D latent dims, T frames, L latent frames.
#include <doctest/doctest.h>

#include <cmath>

#include "audio/error.h"
#include "layer_test_util.h"
#include "quant/decoder.h"
#include "quant/encoder.h"

using namespace tessera::quant;
using namespace tessera::quant::test;

namespace {

Tensor tensor_from_torch(const std::vector<float>& v, int B, int C, int T) {
  Tensor t(B, C, T);
  for (int b = 0; b < B; ++b)
    for (int c = 0; c < C; ++c)
      for (int i = 0; i < T; ++i) t.at(b, c, i) = v[(std::size_t(b) * C + c) * T + i];
  return t;
}

Tensor random_tensor(int B, int C, int T, std::mt19937_64& rng) {
  Tensor t(B, C, T);
  std::normal_distribution<float> nd;
  for (std::size_t i = 0; i < t.size(); ++i) t.data()[i] = nd(rng);
  return t;
}

std::vector<float> values(const Tensor& t) { return {t.data(), t.data() + t.size()}; }

// A model: slab, pool, encoder, decoder, initialised from `seed`.
struct Model {
  ParamSlab slab;
  ThreadPool pool;
  Encoder enc;
  Decoder dec;
  Model(const ModelConfig& cfg, int threads, std::uint64_t seed = 1)
      : pool(threads), enc(cfg, slab, pool), dec(cfg, slab, pool) {
    std::mt19937_64 rng(seed);
    enc.init(slab, rng);
    dec.init(slab, rng);
  }
  // y = dec(enc(x)); with dy, also backward through both (grads zeroed first).
  void step(const Tensor& x, Tensor& z, Tensor& y, const Tensor* dy = nullptr, Tensor* dz = nullptr) {
    enc.forward(x, z, slab);
    dec.forward(z, y, slab);
    if (!dy) return;
    slab.zero_grad();
    dec.backward(*dy, *dz, slab);
    enc.backward(*dz, slab);
  }
};

}  // namespace

TEST_CASE("encoder + decoder match PyTorch end to end (small width, reference layer sequence)") {
  // Source: tests/fixtures/encoder_decoder.txt from make_layer_fixtures.py (torch 1.13,
  // float64), torch_reference.py's Encoder/Decoder at C = 6.
  const auto cases = read_fixtures(std::string(TESSERA_FIXTURES) + "/encoder_decoder.txt");
  const FixtureCase& c = cases.at("tiny_encoder_decoder");
  ModelConfig cfg;
  cfg.n_mels = c.i("n_mels"), cfg.channels = c.i("channels"), cfg.latent_dim = c.i("latent_dim");
  cfg.strides = std::vector<int>(std::size_t(c.i("n_strides")), c.i("stride"));
  cfg.dilations = {c.i("dilation0"), c.i("dilation1")};
  const int B = c.i("B"), T = c.i("T"), L = T / cfg.hop();
  for (int threads : {1, 2}) {
    CAPTURE(threads);
    Model m(cfg, threads);
    std::size_t n_fixture_params = 0;
    for (const auto& [key, v] : c.tensors) n_fixture_params += key.rfind("p:", 0) == 0 ? v.size() : 0;
    CHECK(m.slab.count() == n_fixture_params);
    for (const ParamEntry& e : m.slab.entries()) {
      const std::vector<float>& w = c.t("p:" + e.name);
      REQUIRE(w.size() == e.ref.size);
      float* dst = m.slab.value(e.ref).data();
      if (e.shape.size() == 1)
        std::copy(w.begin(), w.end(), dst);
      else if (e.name.find(".up.") != std::string::npos)  // ConvTranspose1d
        convt_weight_from_torch(dst, w, e.shape[2], e.shape[0], e.shape[1]);
      else
        conv_weight_from_torch(dst, w, e.shape[0], e.shape[2], e.shape[1]);
    }
    const Tensor x = tensor_from_torch(c.t("x"), B, cfg.n_mels, T);
    const Tensor dy = tensor_from_torch(c.t("dy"), B, cfg.n_mels, T);
    Tensor z, y, dz;
    m.step(x, z, y, &dy, &dz);
    REQUIRE(z.T() == L);
    check_close("z", values(z), values(tensor_from_torch(c.t("z"), B, cfg.latent_dim, L)), 1e-5, 1e-4);
    check_close("y", values(y), values(tensor_from_torch(c.t("y"), B, cfg.n_mels, T)), 1e-5, 1e-4);
    check_close("dL/dz (decoder input gradient)", values(dz),
                values(tensor_from_torch(c.t("dz"), B, cfg.latent_dim, L)), 1e-5, 1e-4);
    double worst = 0;
    for (const ParamEntry& e : m.slab.entries()) {
      const float* g = m.slab.grad(e.ref).data();
      std::vector<float> got;
      if (e.shape.size() == 1)
        got.assign(g, g + e.ref.size);
      else if (e.name.find(".up.") != std::string::npos)
        got = convt_weight_to_torch(g, e.shape[2], e.shape[0], e.shape[1]);
      else
        got = conv_weight_to_torch(g, e.shape[0], e.shape[2], e.shape[1]);
      const std::vector<float>& ref = c.t("g:" + e.name);
      std::size_t bad = 0;
      for (std::size_t i = 0; i < ref.size(); ++i) {
        const double err = std::abs(double(got[i]) - ref[i]);
        worst = std::max(worst, err);
        bad += err > 1e-4 + 1e-4 * std::abs(ref[i]);
      }
      CHECK_MESSAGE(bad == 0, e.name << ": " << bad << " gradient values off");
    }
    MESSAGE("max abs error over all parameter gradients: " << worst);
  }
}

TEST_CASE("reference architecture: parameter counts and shapes") {
  // Counts printed by torch_reference.py --mode train ("params": encoder 2342784,
  // decoder 2473808; total 4,816,592 in its README).
  ModelConfig cfg;
  Model m(cfg, 1);
  CHECK(m.enc.params().size == 2342784);
  CHECK(m.dec.params().size == 2473808);
  CHECK(m.slab.count() == 4816592);
  CHECK(m.slab.find("encoder.conv_in.w")->shape == std::vector<int>{256, 7, 80});
  CHECK(m.slab.find("decoder.stage0.up.w")->shape == std::vector<int>{256, 4, 256});
  std::mt19937_64 rng(3);
  for (int T : {200, 203}) {  // 100 frames/s input, 25 latent frames/s; T/4 rounded down
    const Tensor x = random_tensor(2, 80, T, rng);
    Tensor z, y;
    m.step(x, z, y);
    CHECK(z.B() == 2);
    CHECK(z.C() == 128);
    CHECK(z.T() == T / 4);
    CHECK(y.C() == 80);
    CHECK(y.T() == 4 * (T / 4));
    CHECK(std::isfinite(z.all().sum()));
  }
}

TEST_CASE("weight init is U(-1/sqrt(fan_in), 1/sqrt(fan_in)) as PyTorch's default") {
  // torch.nn.Conv1d.reset_parameters: kaiming_uniform_(a=√5) → bound 1/√fan_in; a uniform
  // variable on [−b, b] has variance b²/3. ConvTranspose1d's fan_in is C_out·k.
  ModelConfig cfg;
  Model m(cfg, 1, 42);
  struct Expect { const char* name; double fan_in; };
  for (Expect e : {Expect{"encoder.conv_in.w", 80 * 7}, Expect{"encoder.stage0.unit0.conv_dil.w", 256 * 3},
                   Expect{"decoder.stage1.up.w", 256 * 4}, Expect{"decoder.conv_out.b", 256 * 7}}) {
    CAPTURE(std::string(e.name));
    const auto v = m.slab.value(m.slab.find(e.name)->ref);
    const double bound = 1.0 / std::sqrt(e.fan_in);
    double mx = 0, ss = 0;
    for (float w : v) mx = std::max(mx, double(std::abs(w))), ss += double(w) * w;
    CHECK(mx <= bound);
    if (v.size() > 10000) {
      CHECK(mx > 0.999 * bound);
      CHECK(ss / double(v.size()) == doctest::Approx(bound * bound / 3).epsilon(0.02));
    }
  }
}

TEST_CASE("gradients through decoder and encoder match central differences (small config)") {
  ModelConfig cfg;
  cfg.n_mels = 3, cfg.channels = 4, cfg.latent_dim = 2, cfg.strides = {2}, cfg.dilations = {1, 2};
  Model m(cfg, 2, 5);
  std::mt19937_64 rng(6);
  const int B = 2, T = 8;
  const Tensor x = random_tensor(B, cfg.n_mels, T, rng);
  const Tensor r = random_tensor(B, cfg.n_mels, T, rng);
  Tensor z, y, dz;
  auto loss = [&] {
    m.enc.forward(x, z, m.slab);
    m.dec.forward(z, y, m.slab);
    double s = 0;
    for (std::size_t i = 0; i < y.size(); ++i) s += double(y.data()[i]) * r.data()[i];
    return s;
  };
  m.step(x, z, y, &r, &dz);
  const std::vector<float> g(m.slab.grads(), m.slab.grads() + m.slab.count());
  // Every parameter, central differences with h = 2e-3 (ELU'' jumps at 0: loose atol).
  std::size_t bad = 0;
  double num = 0, den = 0;
  for (std::size_t i = 0; i < m.slab.count(); ++i) {
    float* p = m.slab.params() + i;
    const float p0 = *p;
    *p = p0 + 2e-3f;
    const double hi = *p, lp = loss();
    *p = p0 - 2e-3f;
    const double lo = *p, lm = loss();
    *p = p0;
    const double fd = (lp - lm) / (hi - lo);
    num += (fd - g[i]) * (fd - g[i]), den += fd * fd;
    bad += std::abs(fd - g[i]) > 2e-3 + 1e-2 * std::abs(fd);
  }
  const double rel = std::sqrt(num / den);
  MESSAGE("relative L2 error of all " << m.slab.count() << " parameter gradients: " << rel);
  CHECK(rel < 1e-3);
  CHECK(bad == 0);
}

TEST_CASE("results are deterministic for a thread count and agree across counts") {
  ModelConfig cfg;
  cfg.channels = 32;
  std::mt19937_64 rng(8);
  const Tensor x = random_tensor(5, cfg.n_mels, 48, rng);  // 5 items: uneven split over 2 lanes
  const Tensor dy = random_tensor(5, cfg.n_mels, 48, rng);
  std::vector<std::vector<float>> grads, outs;
  for (int threads : {1, 2, 2}) {
    Model m(cfg, threads);
    Tensor z, y, dz;
    m.step(x, z, y, &dy, &dz);
    grads.emplace_back(m.slab.grads(), m.slab.grads() + m.slab.count());
    outs.push_back(values(y));
  }
  CHECK(grads[1] == grads[2]);  // bitwise: fixed lane split and reduction order
  CHECK(outs[1] == outs[2]);
  check_close("y, 2 threads vs 1", outs[1], outs[0], 1e-5, 1e-5);
  check_close("grads, 2 threads vs 1", grads[1], grads[0], 1e-4, 1e-4);
}

TEST_CASE("one long utterance: time-split inference equals the unsplit forward") {
  ModelConfig cfg;  // reference strides and dilations (receptive field), narrow width
  cfg.channels = 24;
  std::mt19937_64 rng(9);
  const Tensor x = random_tensor(1, cfg.n_mels, 1202, rng);
  Model one(cfg, 1), two(cfg, 2);
  Tensor z1, z2, y1, y2;
  one.enc.forward(x, z1, one.slab, false);
  two.enc.forward(x, z2, two.slab, false);
  REQUIRE(z2.T() == 300);
  check_close("z, 2 chunks vs whole", values(z2), values(z1), 1e-5, 1e-5);
  one.dec.forward(z1, y1, one.slab, false);
  two.dec.forward(z1, y2, two.slab, false);
  REQUIRE(y2.T() == 1200);
  check_close("y, 2 chunks vs whole", values(y2), values(y1), 1e-5, 1e-5);
  // And inference equals the training forward.
  Tensor z3;
  one.enc.forward(x, z3, one.slab, true);
  check_close("z, inference vs training forward", values(z3), values(z1), 1e-6, 1e-6);
}

TEST_CASE("variable T per call reuses buffers without changing results") {
  ModelConfig cfg;
  cfg.channels = 16;
  std::mt19937_64 rng(10);
  const Tensor a = random_tensor(3, cfg.n_mels, 64, rng), b = random_tensor(2, cfg.n_mels, 36, rng);
  Model m(cfg, 2), fresh(cfg, 2);
  Tensor z, y, zb, yb;
  m.step(a, z, y);
  m.step(b, z, y);
  fresh.step(b, zb, yb);
  CHECK(values(y) == values(yb));
  CHECK(values(z) == values(zb));
}

TEST_CASE("user errors name the bad value") {
  ModelConfig cfg;
  cfg.channels = 8;
  Model m(cfg, 1);
  Tensor x(1, 40, 32), z, dz(1, cfg.latent_dim, 8);
  x.zero();
  CHECK_THROWS_WITH_AS(m.enc.forward(x, z, m.slab), "encoder input has 40 channels, expected n_mels 80",
                       tessera::Error);
  CHECK_THROWS_WITH_AS(m.enc.backward(dz, m.slab), "encoder backward needs a training forward first",
                       tessera::Error);
  ModelConfig bad;
  bad.strides = {3};
  ParamSlab slab;
  ThreadPool pool(1);
  CHECK_THROWS_WITH_AS(Encoder(bad, slab, pool),
                       "model.strides: expected even strides >= 2 (kernel 2s, padding s/2), got 3", tessera::Error);
}
