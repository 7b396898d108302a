// layers_test.cpp — the GEMM layers against central finite differences and against the
// naive nested-loop reference (quant/layers/conv_reference.h), plus the parameter slab
// and thread pool they run on. B batch, C channels, T frames, k taps.
#include <doctest/doctest.h>

#include <atomic>
#include <cmath>
#include <numeric>

#include "audio/error.h"
#include "layer_test_util.h"
#include "quant/layers/conv1d.h"
#include "quant/layers/conv_reference.h"
#include "quant/layers/conv_transpose1d.h"
#include "quant/layers/elu.h"
#include "quant/layers/residual_unit.h"
#include "quant/param_slab.h"
#include "quant/thread_pool.h"

using namespace tessera::quant;
using namespace tessera::quant::test;

namespace {

// Central differences (f(v + h) − f(v − h)) / 2h of a scalar loss for every value of v,
// against the analytic gradient. The loss is Σ r·y accumulated in double so that float
// rounding of y, not of the sum, limits the accuracy; h is the difference actually
// representable in float. Checks ‖fd − g‖ / ‖fd‖ < 1e-3 (the usual relative-error test
// of gradient checking, common practice) and each element within atol + rtol·|fd|.
template <class Loss>
void check_fd(const std::string& what, float* v, std::size_t n, const std::vector<double>& analytic, Loss&& loss,
              double eps, double atol, double rtol) {
  REQUIRE(analytic.size() == n);
  std::vector<double> fd(n);
  for (std::size_t i = 0; i < n; ++i) {
    const float v0 = v[i];
    v[i] = v0 + float(eps);
    const double hi = v[i];
    const double lp = loss();
    v[i] = v0 - float(eps);
    const double lo = v[i];
    const double lm = loss();
    v[i] = v0;
    fd[i] = (lp - lm) / (hi - lo);
  }
  double num = 0, den = 0;
  for (std::size_t i = 0; i < n; ++i) num += (fd[i] - analytic[i]) * (fd[i] - analytic[i]), den += fd[i] * fd[i];
  const double rel = std::sqrt(num / std::max(den, 1e-30));
  MESSAGE(what << ": relative L2 error of the gradient " << rel);
  CHECK(rel < 1e-3);
  check_close(what, analytic, fd, atol, rtol);
}

double dot(const std::vector<float>& a, const std::vector<float>& b) {
  double s = 0;
  for (std::size_t i = 0; i < a.size(); ++i) s += double(a[i]) * b[i];
  return s;
}

std::vector<double> to_double(std::span<const float> v) { return {v.begin(), v.end()}; }
std::vector<double> to_double(const std::vector<float>& v) { return {v.begin(), v.end()}; }

// Random input in torch layout; values kept at least `gap` away from 0 when asked
// (so an ELU input never straddles its kink within ±eps).
std::vector<float> random_input(std::size_t n, std::mt19937_64& rng, float gap = 0.0f) {
  std::vector<float> v = random_vector(n, rng);
  for (float& x : v)
    if (std::abs(x) < gap) x = x < 0 ? x - gap : x + gap;
  return v;
}

struct ConvCase {
  int B, ci, co, T, k, stride, dilation, pl, pr;
};

}  // namespace

TEST_CASE("conv1d backward matches central differences") {
  std::mt19937_64 rng(7);
  for (const ConvCase& cc : {ConvCase{2, 3, 2, 9, 3, 1, 2, 2, 2}, ConvCase{2, 2, 3, 10, 4, 2, 1, 1, 1},
                             ConvCase{1, 3, 2, 8, 3, 1, 1, 2, 0}, ConvCase{2, 3, 3, 5, 1, 1, 1, 0, 0}}) {
    CAPTURE(cc.k);
    CAPTURE(cc.stride);
    CAPTURE(cc.dilation);
    const Conv1dShape s{cc.ci, cc.co, cc.k, cc.stride, cc.dilation, cc.pl, cc.pr};
    const int To = s.out_frames(cc.T);
    ParamSlab slab;
    Conv1d conv(slab, "c", s);
    conv.init(slab, rng);
    std::vector<float> xt = random_input(std::size_t(cc.B) * cc.ci * cc.T, rng);
    const std::vector<float> r = random_vector(std::size_t(cc.B) * cc.co * To, rng);
    PaddedTensor x, y, dy, dx;
    auto loss = [&] {
      from_torch(x, xt, cc.B, cc.ci, cc.T, s.margin());
      y.reshape(cc.B, cc.co, To, 0);
      conv.forward(y.view(), x.view(), slab.view());
      return dot(to_torch(y.view()), r);
    };
    loss();
    from_torch(dy, r, cc.B, cc.co, To, 0);
    dx.reshape(cc.B, cc.ci, cc.T, s.margin());
    dx.zero();
    const SeqView dxv = dx.view();
    conv.backward(&dxv, dy.view(), x.view(), slab.view());
    // Linear in every argument: differences are exact up to rounding.
    check_fd("conv1d dx", xt.data(), xt.size(), to_double(to_torch(dx.view())), loss, 1e-2, 1e-4, 1e-3);
    check_fd("conv1d dw", slab.value(conv.w).data(), conv.w.size, to_double(slab.grad(conv.w)), loss, 1e-2, 1e-4,
             1e-3);
    check_fd("conv1d db", slab.value(conv.b).data(), conv.b.size, to_double(slab.grad(conv.b)), loss, 1e-2, 1e-4,
             1e-3);
  }
}

TEST_CASE("conv_transpose1d backward matches central differences") {
  std::mt19937_64 rng(8);
  for (const ConvTranspose1dShape& s : {ConvTranspose1dShape{3, 2, 4, 2, 1, 0}, ConvTranspose1dShape{2, 3, 5, 2, 2, 1},
                                        ConvTranspose1dShape{2, 2, 3, 3, 0, 0}}) {
    CAPTURE(s.k);
    CAPTURE(s.stride);
    const int B = 2, T = 5, To = s.out_frames(T);
    ParamSlab slab;
    ConvTranspose1d conv(slab, "t", s);
    conv.init(slab, rng);
    std::vector<float> xt = random_input(std::size_t(B) * s.c_in * T, rng);
    const std::vector<float> r = random_vector(std::size_t(B) * s.c_out * To, rng);
    PaddedTensor x, y, dy, dx;
    auto loss = [&] {
      from_torch(x, xt, B, s.c_in, T, s.margin());
      y.reshape(B, s.c_out, To, 0);
      conv.forward(y.view(), x.view(), slab.view());
      return dot(to_torch(y.view()), r);
    };
    loss();
    from_torch(dy, r, B, s.c_out, To, 0);
    dx.reshape(B, s.c_in, T, s.margin());
    dx.zero();
    const SeqView dxv = dx.view();
    conv.backward(&dxv, dy.view(), x.view(), slab.view());
    check_fd("convT dx", xt.data(), xt.size(), to_double(to_torch(dx.view())), loss, 1e-2, 1e-4, 1e-3);
    check_fd("convT dw", slab.value(conv.w).data(), conv.w.size, to_double(slab.grad(conv.w)), loss, 1e-2, 1e-4,
             1e-3);
    check_fd("convT db", slab.value(conv.b).data(), conv.b.size, to_double(slab.grad(conv.b)), loss, 1e-2, 1e-4,
             1e-3);
  }
}

TEST_CASE("elu backward matches central differences") {
  std::mt19937_64 rng(9);
  const int B = 2, C = 3, T = 6;
  std::vector<float> xt = random_input(std::size_t(B) * C * T, rng, 0.05f);
  const std::vector<float> r = random_vector(xt.size(), rng);
  PaddedTensor x, y, dy, dx;
  auto loss = [&] {
    from_torch(x, xt, B, C, T, 0);
    y.reshape(B, C, T, 0);
    elu_forward(y.view(), x.view());
    return dot(to_torch(y.view()), r);
  };
  loss();
  from_torch(dy, r, B, C, T, 0);
  dx.reshape(B, C, T, 0);
  dx.zero();
  elu_backward(dx.view(), dy.view(), y.view());
  check_fd("elu dx", xt.data(), xt.size(), to_double(to_torch(dx.view())), loss, 1e-3, 2e-4, 1e-3);
}

TEST_CASE("residual unit backward matches central differences") {
  std::mt19937_64 rng(10);
  const int B = 2, C = 3, T = 8;
  ParamSlab slab;
  ResidualUnit unit(slab, "u", C, 2);
  unit.init(slab, rng);
  std::vector<float> xt = random_input(std::size_t(B) * C * T, rng, 0.05f);
  const std::vector<float> r = random_vector(xt.size(), rng);
  PaddedTensor x, y, d;
  ResidualUnit::Acts acts;
  ResidualUnit::Scratch scratch;
  auto loss = [&] {
    from_torch(x, xt, B, C, T, 0);
    y.reshape(B, C, T, 0);
    unit.forward(y.view(), x.view(), acts, slab.view());
    return dot(to_torch(y.view()), r);
  };
  loss();
  from_torch(d, r, B, C, T, 0);
  unit.backward(d.view(), d.view(), acts, scratch, slab.view());
  // Smooth except where a pre-activation crosses 0 within ±eps (ELU'' jumps there).
  const double eps = 2e-3, atol = 2e-3, rtol = 1e-2;
  check_fd("unit dx", xt.data(), xt.size(), to_double(to_torch(d.view())), loss, eps, atol, rtol);
  for (ParamRef p : {unit.conv_dil.w, unit.conv_dil.b, unit.conv_1x1.w, unit.conv_1x1.b})
    check_fd("unit param", slab.value(p).data(), p.size, to_double(slab.grad(p)), loss, eps, atol, rtol);
}

TEST_CASE("conv1d GEMM path equals the naive reference on GEMM-sized shapes") {
  // Shapes large enough that Eigen runs its blocked GEMM kernels (not its small-product path).
  std::mt19937_64 rng(11);
  for (const ConvCase& cc :
       {ConvCase{3, 24, 40, 37, 3, 1, 1, 1, 1}, ConvCase{3, 24, 40, 37, 3, 1, 5, 5, 5},
        ConvCase{2, 32, 24, 40, 4, 2, 1, 1, 1}, ConvCase{2, 20, 33, 41, 7, 1, 1, 3, 3},
        ConvCase{2, 24, 16, 50, 5, 3, 2, 2, 2}, ConvCase{2, 24, 24, 30, 3, 1, 3, 6, 0},
        ConvCase{3, 40, 24, 33, 1, 1, 1, 0, 0}}) {
    CAPTURE(cc.k);
    CAPTURE(cc.stride);
    CAPTURE(cc.dilation);
    const Conv1dShape s{cc.ci, cc.co, cc.k, cc.stride, cc.dilation, cc.pl, cc.pr};
    const int To = s.out_frames(cc.T);
    const reference::ConvDims n{cc.B, cc.ci, cc.co, cc.T, To, cc.k, cc.stride, cc.dilation, cc.pl};
    ParamSlab slab;
    Conv1d conv(slab, "c", s);
    conv.init(slab, rng);
    const std::vector<float> xt = random_vector(std::size_t(cc.B) * cc.ci * cc.T, rng);
    const std::vector<float> dyt = random_vector(std::size_t(cc.B) * cc.co * To, rng);
    const std::vector<float> wt = conv_weight_to_torch(slab.value(conv.w).data(), cc.co, cc.ci, cc.k);
    const std::vector<float> bt(slab.value(conv.b).begin(), slab.value(conv.b).end());

    PaddedTensor x, y, dy, dx;
    from_torch(x, xt, cc.B, cc.ci, cc.T, s.margin());
    y.reshape(cc.B, cc.co, To, 0);
    conv.forward(y.view(), x.view(), slab.view());
    check_close("conv1d y", to_torch(y.view()), reference::conv1d_forward(n, xt, wt, bt), 1e-4, 1e-4);

    // Backward accumulates: start dx at 1 and run twice, expect 1 + 2·grad.
    from_torch(dy, dyt, cc.B, cc.co, To, 0);
    dx.reshape(cc.B, cc.ci, cc.T, s.margin());
    dx.zero();
    for (int i = 0; i < cc.B; ++i) std::fill_n(dx.view().frame(i, 0), std::size_t(cc.T) * cc.ci, 1.0f);
    const SeqView dxv = dx.view();
    conv.backward(&dxv, dy.view(), x.view(), slab.view());
    conv.backward(&dxv, dy.view(), x.view(), slab.view());
    std::vector<double> rdx, rdw, rdb;
    reference::conv1d_backward(n, dyt, xt, wt, rdx, rdw, rdb);
    for (double& v : rdx) v = 1.0 + 2.0 * v;
    for (double& v : rdw) v *= 2.0;
    for (double& v : rdb) v *= 2.0;
    check_close("conv1d dx (accumulated)", to_torch(dx.view()), rdx, 2e-4, 1e-4);
    check_close("conv1d dw (accumulated)", conv_weight_to_torch(slab.grad(conv.w).data(), cc.co, cc.ci, cc.k), rdw,
                2e-4, 1e-4);
    check_close("conv1d db (accumulated)", to_double(slab.grad(conv.b)), rdb, 2e-4, 1e-4);
  }
}

TEST_CASE("conv_transpose1d phase GEMMs equal the naive reference on GEMM-sized shapes") {
  // Both layouts: items (one GEMM per item, phase and tap) and interleaved (the decoder's
  // [T][B][C] order: one GEMM per phase and tap for the whole batch, copied into place).
  std::mt19937_64 rng(12);
  for (Layout lay : {Layout::items, Layout::interleaved})
  for (const ConvTranspose1dShape& s :
       {ConvTranspose1dShape{24, 40, 4, 2, 1, 0}, ConvTranspose1dShape{32, 20, 6, 3, 1, 2},
        ConvTranspose1dShape{20, 24, 5, 2, 2, 1}, ConvTranspose1dShape{24, 24, 3, 1, 1, 0}}) {
    CAPTURE(s.k);
    CAPTURE(s.stride);
    CAPTURE(int(lay));
    const int B = lay == Layout::items ? 2 : 3, T = 29, To = s.out_frames(T);
    const reference::ConvDims n{B, s.c_in, s.c_out, T, To, s.k, s.stride, 1, s.pad};
    ParamSlab slab;
    ConvTranspose1d conv(slab, "t", s);
    conv.init(slab, rng);
    const std::vector<float> xt = random_vector(std::size_t(B) * s.c_in * T, rng);
    const std::vector<float> dyt = random_vector(std::size_t(B) * s.c_out * To, rng);
    const std::vector<float> wt = convt_weight_to_torch(slab.value(conv.w).data(), s.c_in, s.c_out, s.k);
    const std::vector<float> bt(slab.value(conv.b).begin(), slab.value(conv.b).end());

    PaddedTensor x, y, dy, dx;
    from_torch(x, xt, B, s.c_in, T, s.margin(), lay);
    y.reshape(B, s.c_out, To, 0, lay);
    conv.forward(y.view(), x.view(), slab.view());
    check_close("convT y", to_torch(y.view()), reference::conv_transpose1d_forward(n, xt, wt, bt), 1e-4, 1e-4);

    from_torch(dy, dyt, B, s.c_out, To, 0, lay);
    dx.reshape(B, s.c_in, T, s.margin(), lay);
    dx.zero();
    const SeqView dxv = dx.view();
    conv.backward(&dxv, dy.view(), x.view(), slab.view());
    std::vector<double> rdx, rdw, rdb;
    reference::conv_transpose1d_backward(n, dyt, xt, wt, rdx, rdw, rdb);
    check_close("convT dx", to_torch(dx.view()), rdx, 1e-4, 1e-4);
    check_close("convT dw", convt_weight_to_torch(slab.grad(conv.w).data(), s.c_in, s.c_out, s.k), rdw, 1e-4,
                1e-4);
    check_close("convT db", to_double(slab.grad(conv.b)), rdb, 1e-4, 1e-4);
  }
}

TEST_CASE("long sequences and interleaved batches equal the naive reference") {
  // Several 512-frame GEMM blocks per item, and the [T][B][C] order the encoder uses, where
  // a stride-1 conv of the batch runs as one sequence with dilation d·B.
  std::mt19937_64 rng(13);
  struct Case {
    ConvCase c;
    Layout layout;
  };
  for (const Case& cs : {Case{{2, 8, 12, 1100, 3, 1, 2, 2, 2}, Layout::items},
                         Case{{1, 8, 12, 1300, 4, 2, 1, 1, 1}, Layout::items},
                         Case{{3, 8, 12, 400, 3, 1, 3, 3, 3}, Layout::interleaved},
                         Case{{3, 8, 12, 400, 3, 1, 1, 1, 1}, Layout::interleaved},
                         Case{{3, 8, 12, 401, 4, 2, 1, 1, 1}, Layout::interleaved},
                         Case{{4, 12, 8, 300, 1, 1, 1, 0, 0}, Layout::interleaved}}) {
    const ConvCase& cc = cs.c;
    CAPTURE(cc.T);
    CAPTURE(cc.k);
    CAPTURE(cc.stride);
    CAPTURE(cc.dilation);
    CAPTURE(int(cs.layout));
    const Conv1dShape s{cc.ci, cc.co, cc.k, cc.stride, cc.dilation, cc.pl, cc.pr};
    const int To = s.out_frames(cc.T);
    const reference::ConvDims n{cc.B, cc.ci, cc.co, cc.T, To, cc.k, cc.stride, cc.dilation, cc.pl};
    ParamSlab slab;
    Conv1d conv(slab, "c", s);
    conv.init(slab, rng);
    const std::vector<float> xt = random_vector(std::size_t(cc.B) * cc.ci * cc.T, rng);
    const std::vector<float> dyt = random_vector(std::size_t(cc.B) * cc.co * To, rng);
    const std::vector<float> wt = conv_weight_to_torch(slab.value(conv.w).data(), cc.co, cc.ci, cc.k);
    const std::vector<float> bt(slab.value(conv.b).begin(), slab.value(conv.b).end());
    PaddedTensor x, y, dy, dx;
    from_torch(x, xt, cc.B, cc.ci, cc.T, s.margin(), cs.layout);
    y.reshape(cc.B, cc.co, To, 0, cs.layout);
    conv.forward(y.view(), x.view(), slab.view());
    check_close("y", to_torch(y.view()), reference::conv1d_forward(n, xt, wt, bt), 1e-4, 1e-4);
    from_torch(dy, dyt, cc.B, cc.co, To, 0, cs.layout);
    dx.reshape(cc.B, cc.ci, cc.T, s.margin(), cs.layout);
    dx.zero();
    const SeqView dxv = dx.view();
    conv.backward(&dxv, dy.view(), x.view(), slab.view());
    std::vector<double> rdx, rdw, rdb;
    reference::conv1d_backward(n, dyt, xt, wt, rdx, rdw, rdb);
    check_close("dx", to_torch(dx.view()), rdx, 1e-4, 1e-4);
    check_close("dw", conv_weight_to_torch(slab.grad(conv.w).data(), cc.co, cc.ci, cc.k), rdw, 1e-3, 1e-4);
    check_close("db", to_double(slab.grad(conv.b)), rdb, 1e-3, 1e-4);
  }
  // ConvTranspose1d and the residual unit on an interleaved batch equal the items layout.
  const ConvTranspose1dShape ts{8, 6, 4, 2, 1, 0};
  ParamSlab slab;
  ConvTranspose1d convt(slab, "t", ts);
  ResidualUnit unit(slab, "u", 6, 3);
  convt.init(slab, rng);
  unit.init(slab, rng);
  const int B = 3, T = 40;
  const std::vector<float> xt = random_vector(std::size_t(B) * 8 * T, rng);
  const std::vector<float> dyt = random_vector(std::size_t(B) * 6 * 2 * T, rng);
  std::vector<std::vector<float>> outs, grads;
  for (Layout lay : {Layout::items, Layout::interleaved}) {
    slab.zero_grad();
    PaddedTensor x, h, d, dx;
    from_torch(x, xt, B, 8, T, ts.margin(), lay);
    h.reshape(B, 6, 2 * T, 0, lay);
    convt.forward(h.view(), x.view(), slab.view());
    ResidualUnit::Acts acts;
    ResidualUnit::Scratch scratch;
    unit.forward(h.view(), h.view(), acts, slab.view());
    outs.push_back(to_torch(h.view()));
    from_torch(d, dyt, B, 6, 2 * T, 0, lay);
    unit.backward(d.view(), d.view(), acts, scratch, slab.view());
    dx.reshape(B, 8, T, ts.margin(), lay);
    dx.zero();
    const SeqView dxv = dx.view();
    convt.backward(&dxv, d.view(), x.view(), slab.view());
    grads.push_back(to_torch(dx.view()));
    grads.back().insert(grads.back().end(), slab.grads(), slab.grads() + slab.count());
  }
  check_close("convT + unit y, interleaved vs items", outs[1], outs[0], 1e-5, 1e-5);
  check_close("convT + unit grads, interleaved vs items", grads[1], grads[0], 1e-4, 1e-4);
}

TEST_CASE("conv1d output length follows torch's formula") {
  // torch.nn.Conv1d docs: L_out = ⌊(L_in + 2·padding − dilation·(k − 1) − 1) / stride⌋ + 1.
  CHECK(Conv1dShape::padded(1, 1, 4, 2, 1).out_frames(200) == 100);
  CHECK(Conv1dShape::padded(1, 1, 4, 2, 1).out_frames(201) == 100);
  CHECK(Conv1dShape::same(1, 1, 3, 9).out_frames(50) == 50);
  CHECK(Conv1dShape::causal(1, 1, 3, 9).out_frames(50) == 50);
  // torch.nn.ConvTranspose1d docs: L_out = (L_in − 1)·stride − 2·padding + k + output_padding.
  CHECK(ConvTranspose1dShape{1, 1, 4, 2, 1, 0}.out_frames(50) == 100);
}

TEST_CASE("param slab: one buffer each, named entries, zero_grad") {
  ParamSlab slab;
  const ParamRef a = slab.add("a.w", {4, 3, 2});
  const ParamRef b = slab.add("a.b", {4});
  CHECK(slab.count() == 28);
  CHECK(a.offset == 0);
  CHECK(b.offset == 24);
  REQUIRE(slab.entries().size() == 2);
  CHECK(slab.entries()[0].shape == std::vector<int>{4, 3, 2});
  CHECK(slab.find("a.b")->ref.offset == 24);
  CHECK(slab.find("nope") == nullptr);
  CHECK_THROWS_WITH_AS(slab.add("a.w", {1}), "parameter 'a.w' is registered twice", tessera::Error);
  CHECK_THROWS_AS(slab.add("c", {0, 2}), tessera::Error);
  slab.grad(b)[3] = 5.0f;
  CHECK(slab.grads()[27] == 5.0f);
  slab.zero_grad();
  CHECK(slab.grads()[27] == 0.0f);
}

TEST_CASE("thread pool runs every lane once and rethrows a lane's exception") {
  ThreadPool pool(3);
  CHECK(pool.size() == 3);
  std::vector<int> hits(3, 0);
  pool.run([&](int lane) { hits[std::size_t(lane)] += 1; });
  CHECK(hits == std::vector<int>{1, 1, 1});
  std::atomic<std::size_t> total{0};
  pool.parallel_for(1000, [&](std::size_t b, std::size_t e) { total += e - b; });
  CHECK(total == 1000);
  CHECK_THROWS_WITH(pool.run([](int lane) {
    if (lane == 2) throw tessera::Error("lane 2 failed");
  }),
                    "lane 2 failed");
  pool.run([&](int lane) { hits[std::size_t(lane)] += 1; });  // still usable
  CHECK(hits == std::vector<int>{2, 2, 2});
  CHECK_THROWS_AS(ThreadPool(0), tessera::Error);
}
