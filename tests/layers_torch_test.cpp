// layers_torch_test.cpp — Conv1d, ConvTranspose1d, ELU and the residual unit, forward and
// backward, against PyTorch 1.13 (torch.nn.functional in float64) on tiny shapes.
// Source of every reference value: tests/fixtures/layers.txt, written by
// tests/fixtures/make_layer_fixtures.py. B batch, C channels, T frames, k taps.
#include <doctest/doctest.h>

#include "layer_test_util.h"
#include "quant/layers/conv1d.h"
#include "quant/layers/conv_transpose1d.h"
#include "quant/layers/elu.h"
#include "quant/layers/residual_unit.h"

using namespace tessera::quant;
using namespace tessera::quant::test;

namespace {

// Float32 GEMMs against float64 torch: a few ulps of sums of O(10) terms of size O(1).
constexpr double kAtol = 2e-5, kRtol = 1e-4;

const std::map<std::string, FixtureCase>& fixtures() {
  static const auto cases = read_fixtures(std::string(TESSERA_FIXTURES) + "/layers.txt");
  return cases;
}

void check_conv1d_case(const FixtureCase& c) {
  const int B = c.i("B"), ci = c.i("c_in"), co = c.i("c_out"), T = c.i("t_in"), k = c.i("k");
  Conv1dShape shape;
  if (c.get("same", 0))  // torch padding='same': our split of d·(k − 1) must match torch's
    shape = Conv1dShape::same(ci, co, k, c.i("dilation"));
  else
    shape = {ci, co, k, c.i("stride"), c.i("dilation"), c.i("pad_left"), c.i("pad_right")};
  REQUIRE(shape.out_frames(T) == c.i("t_out"));
  ParamSlab slab;
  Conv1d conv(slab, "conv", shape);
  conv_weight_from_torch(slab.value(conv.w).data(), c.t("w"), co, ci, k);
  std::copy(c.t("b").begin(), c.t("b").end(), slab.value(conv.b).begin());

  PaddedTensor x, y, dy, dx;
  from_torch(x, c.t("x"), B, ci, T, shape.margin());
  y.reshape(B, co, shape.out_frames(T), 0);
  conv.forward(y.view(), x.view(), slab.view());
  check_close(c.name + " y", to_torch(y.view()), c.t("y"), kAtol, kRtol);

  from_torch(dy, c.t("dy"), B, co, shape.out_frames(T), 0);
  dx.reshape(B, ci, T, shape.margin());
  dx.zero();
  const SeqView dxv = dx.view();
  conv.backward(&dxv, dy.view(), x.view(), slab.view());
  check_close(c.name + " dx", to_torch(dx.view()), c.t("dx"), kAtol, kRtol);
  check_close(c.name + " dw", conv_weight_to_torch(slab.grad(conv.w).data(), co, ci, k), c.t("dw"), kAtol, kRtol);
  check_close(c.name + " db", std::vector<float>(slab.grad(conv.b).begin(), slab.grad(conv.b).end()), c.t("db"),
              kAtol, kRtol);
}

}  // namespace

TEST_CASE("conv1d matches torch: same, dilated, strided, causal, k1, even-k same") {
  for (const char* name : {"conv1d_same_k3", "conv1d_same_k3_d3", "conv1d_same_k7", "conv1d_k4_s2_p1_even",
                           "conv1d_k4_s2_p1_odd", "conv1d_causal_k3_d2", "conv1d_k1", "conv1d_k5_s3_d2_p2",
                           "conv1d_torch_same_k4", "conv1d_torch_same_k3_d9"}) {
    const std::string case_name = name;
    CAPTURE(case_name);
    check_conv1d_case(fixtures().at(name));
  }
}

TEST_CASE("conv1d causal padding equals torch's left pad (k − 1)·d") {
  // Fixture conv1d_causal_k3_d2 pads (4, 0) with F.pad before a plain conv.
  const Conv1dShape s = Conv1dShape::causal(3, 4, 3, 2);
  CHECK(s.pad_left == 4);
  CHECK(s.pad_right == 0);
  CHECK(s.out_frames(10) == fixtures().at("conv1d_causal_k3_d2").i("t_out"));
}

TEST_CASE("conv_transpose1d matches torch: k4 s2 p1, output_padding, stride > k") {
  for (const char* name : {"convt_k4_s2_p1", "convt_k5_s2_p2_op1", "convt_k3_s3_p0", "convt_k3_s1_p1",
                           "convt_k2_s4_p1"}) {
    const std::string case_name = name;
    CAPTURE(case_name);
    const FixtureCase& c = fixtures().at(name);
    const int B = c.i("B"), ci = c.i("c_in"), co = c.i("c_out"), T = c.i("t_in"), k = c.i("k");
    const ConvTranspose1dShape shape{ci, co, k, c.i("stride"), c.i("pad"), c.i("output_padding")};
    REQUIRE(shape.out_frames(T) == c.i("t_out"));
    ParamSlab slab;
    ConvTranspose1d conv(slab, "convt", shape);
    convt_weight_from_torch(slab.value(conv.w).data(), c.t("w"), ci, co, k);
    std::copy(c.t("b").begin(), c.t("b").end(), slab.value(conv.b).begin());

    PaddedTensor x, y, dy, dx;
    from_torch(x, c.t("x"), B, ci, T, shape.margin());
    y.reshape(B, co, shape.out_frames(T), 0);
    conv.forward(y.view(), x.view(), slab.view());
    check_close(c.name + " y", to_torch(y.view()), c.t("y"), kAtol, kRtol);

    from_torch(dy, c.t("dy"), B, co, shape.out_frames(T), 0);
    dx.reshape(B, ci, T, shape.margin());
    dx.zero();
    const SeqView dxv = dx.view();
    conv.backward(&dxv, dy.view(), x.view(), slab.view());
    check_close(c.name + " dx", to_torch(dx.view()), c.t("dx"), kAtol, kRtol);
    check_close(c.name + " dw", convt_weight_to_torch(slab.grad(conv.w).data(), ci, co, k), c.t("dw"), kAtol,
                kRtol);
    check_close(c.name + " db", std::vector<float>(slab.grad(conv.b).begin(), slab.grad(conv.b).end()),
                c.t("db"), kAtol, kRtol);
  }
}

TEST_CASE("elu matches torch.nn.functional.elu(alpha=1)") {
  const FixtureCase& c = fixtures().at("elu");
  const int B = c.i("B"), C = c.i("C"), T = c.i("T");
  PaddedTensor x, y, dy, dx;
  from_torch(x, c.t("x"), B, C, T, 0);
  y.reshape(B, C, T, 0);
  elu_forward(y.view(), x.view());
  // e^x − 1 instead of expm1: off by at most about one ulp of 1 near x = 0.
  check_close("elu y", to_torch(y.view()), c.t("y"), 1e-7, 1e-6);
  from_torch(dy, c.t("dy"), B, C, T, 0);
  dx.reshape(B, C, T, 0);
  dx.zero();
  elu_backward(dx.view(), dy.view(), y.view());
  check_close("elu dx", to_torch(dx.view()), c.t("dx"), 1e-7, 1e-5);
}

TEST_CASE("residual unit matches torch_reference.py's ResUnit") {
  for (const char* name : {"residual_unit_d1", "residual_unit_d3"}) {
    const std::string case_name = name;
    CAPTURE(case_name);
    const FixtureCase& c = fixtures().at(name);
    const int B = c.i("B"), C = c.i("C"), T = c.i("T"), d = c.i("dilation");
    ParamSlab slab;
    ResidualUnit unit(slab, "unit", C, d);
    conv_weight_from_torch(slab.value(unit.conv_dil.w).data(), c.t("w1"), C, C, 3);
    std::copy(c.t("b1").begin(), c.t("b1").end(), slab.value(unit.conv_dil.b).begin());
    conv_weight_from_torch(slab.value(unit.conv_1x1.w).data(), c.t("w2"), C, C, 1);
    std::copy(c.t("b2").begin(), c.t("b2").end(), slab.value(unit.conv_1x1.b).begin());

    PaddedTensor x, y, d_io;
    from_torch(x, c.t("x"), B, C, T, 0);
    y.reshape(B, C, T, 0);
    ResidualUnit::Acts acts;
    ResidualUnit::Scratch scratch;
    unit.forward(y.view(), x.view(), acts, slab.view());
    check_close(c.name + " y", to_torch(y.view()), c.t("y"), kAtol, kRtol);

    // In place, as the encoder runs it: the buffer goes from dL/dy to dL/dx.
    from_torch(d_io, c.t("dy"), B, C, T, 0);
    unit.backward(d_io.view(), d_io.view(), acts, scratch, slab.view());
    check_close(c.name + " dx", to_torch(d_io.view()), c.t("dx"), kAtol, kRtol);
    check_close(c.name + " dw1", conv_weight_to_torch(slab.grad(unit.conv_dil.w).data(), C, C, 3), c.t("dw1"),
                kAtol, kRtol);
    check_close(c.name + " db1",
                std::vector<float>(slab.grad(unit.conv_dil.b).begin(), slab.grad(unit.conv_dil.b).end()),
                c.t("db1"), kAtol, kRtol);
    check_close(c.name + " dw2", conv_weight_to_torch(slab.grad(unit.conv_1x1.w).data(), C, C, 1), c.t("dw2"),
                kAtol, kRtol);
    check_close(c.name + " db2",
                std::vector<float>(slab.grad(unit.conv_1x1.b).begin(), slab.grad(unit.conv_1x1.b).end()),
                c.t("db2"), kAtol, kRtol);
  }
}
