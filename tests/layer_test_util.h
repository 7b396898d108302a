// layer_test_util.h — shared helpers of the layer tests: PyTorch-layout conversion,
// a reader for tests/fixtures/layers.txt, and an atol + rtol·|ref| comparison that
// reports its worst error. B batch, C channels, T frames, k taps.
#pragma once
#include <doctest/doctest.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <fstream>
#include <map>
#include <random>
#include <sstream>
#include <stdexcept>
#include <string>
#include <vector>

#include "quant/param_slab.h"
#include "quant/tensor.h"

namespace tessera::quant::test {

// Torch layout [B][C][T] → a padded channels-last batch.
inline void from_torch(PaddedTensor& dst, const std::vector<float>& x, int B, int C, int T, int margin,
                       Layout layout = Layout::items) {
  dst.reshape(B, C, T, margin, layout);
  const SeqView v = dst.view();
  for (int b = 0; b < B; ++b)
    for (int c = 0; c < C; ++c)
      for (int t = 0; t < T; ++t) v.frame(b, t)[c] = x[(std::size_t(b) * C + c) * T + t];
}

// The frames of a view in torch layout [B][C][T].
template <class F>
std::vector<float> to_torch(const SeqViewT<F>& v) {
  std::vector<float> out(std::size_t(v.B) * v.C * v.T);
  for (int b = 0; b < v.B; ++b)
    for (int c = 0; c < v.C; ++c)
      for (int t = 0; t < v.T; ++t) out[(std::size_t(b) * v.C + c) * v.T + t] = v.frame(b, t)[c];
  return out;
}

// Conv1d weight: torch [C_out][C_in][k] ↔ ours (C_out, k, C_in).
inline void conv_weight_from_torch(float* dst, const std::vector<float>& w, int co, int ci, int k) {
  for (int o = 0; o < co; ++o)
    for (int i = 0; i < ci; ++i)
      for (int j = 0; j < k; ++j) dst[(std::size_t(o) * k + j) * ci + i] = w[(std::size_t(o) * ci + i) * k + j];
}
inline std::vector<float> conv_weight_to_torch(const float* w, int co, int ci, int k) {
  std::vector<float> out(std::size_t(co) * ci * k);
  for (int o = 0; o < co; ++o)
    for (int i = 0; i < ci; ++i)
      for (int j = 0; j < k; ++j) out[(std::size_t(o) * ci + i) * k + j] = w[(std::size_t(o) * k + j) * ci + i];
  return out;
}
// ConvTranspose1d weight: torch [C_in][C_out][k] ↔ ours (C_out, k, C_in).
inline void convt_weight_from_torch(float* dst, const std::vector<float>& w, int ci, int co, int k) {
  for (int i = 0; i < ci; ++i)
    for (int o = 0; o < co; ++o)
      for (int j = 0; j < k; ++j) dst[(std::size_t(o) * k + j) * ci + i] = w[(std::size_t(i) * co + o) * k + j];
}
inline std::vector<float> convt_weight_to_torch(const float* w, int ci, int co, int k) {
  std::vector<float> out(std::size_t(ci) * co * k);
  for (int i = 0; i < ci; ++i)
    for (int o = 0; o < co; ++o)
      for (int j = 0; j < k; ++j) out[(std::size_t(i) * co + o) * k + j] = w[(std::size_t(o) * k + j) * ci + i];
  return out;
}

inline std::vector<float> random_vector(std::size_t n, std::mt19937_64& rng, float scale = 1.0f) {
  std::normal_distribution<float> nd(0.0f, scale);
  std::vector<float> v(n);
  for (float& x : v) x = nd(rng);
  return v;
}

// Checks |got − ref| ≤ atol + rtol·|ref| elementwise and prints the worst errors.
template <class A, class Bv>
void check_close(const std::string& what, const A& got, const Bv& ref, double atol, double rtol) {
  REQUIRE_MESSAGE(got.size() == ref.size(), what << ": size " << got.size() << " vs " << ref.size());
  double max_abs = 0, max_rel = 0;
  std::size_t bad = 0;
  for (std::size_t i = 0; i < ref.size(); ++i) {
    const double g = got[i], r = ref[i], e = std::abs(g - r);
    max_abs = std::max(max_abs, e);
    max_rel = std::max(max_rel, e / std::max(std::abs(r), 1e-12));
    if (!(e <= atol + rtol * std::abs(r))) ++bad;
  }
  MESSAGE(what << ": max abs err " << max_abs << ", max rel err " << max_rel << " over " << ref.size());
  CHECK_MESSAGE(bad == 0, what << ": " << bad << " of " << ref.size() << " values outside atol " << atol
                               << " + rtol " << rtol << "·|ref|");
}

// One record of tests/fixtures/layers.txt (see make_layer_fixtures.py).
struct FixtureCase {
  std::string name;
  std::map<std::string, int> ints;
  std::map<std::string, std::vector<float>> tensors;
  std::map<std::string, std::vector<int>> shapes;

  int i(const std::string& k) const {
    auto it = ints.find(k);
    if (it == ints.end()) throw std::runtime_error(name + ": no int '" + k + "'");
    return it->second;
  }
  int get(const std::string& k, int fallback) const {
    auto it = ints.find(k);
    return it == ints.end() ? fallback : it->second;
  }
  const std::vector<float>& t(const std::string& k) const {
    auto it = tensors.find(k);
    if (it == tensors.end()) throw std::runtime_error(name + ": no tensor '" + k + "'");
    return it->second;
  }
};

inline std::map<std::string, FixtureCase> read_fixtures(const std::string& path) {
  std::ifstream in(path);
  if (!in) throw std::runtime_error("cannot open fixture file '" + path + "'");
  std::map<std::string, FixtureCase> cases;
  FixtureCase cur;
  std::string line;
  while (std::getline(in, line)) {
    std::istringstream ls(line);
    std::string kw;
    ls >> kw;
    if (kw.empty() || kw[0] == '#') continue;
    if (kw == "case") {
      cur = FixtureCase{};
      ls >> cur.name;
    } else if (kw == "int") {
      std::string k;
      int v;
      ls >> k >> v;
      cur.ints[k] = v;
    } else if (kw == "tensor") {
      std::string k;
      int nd;
      ls >> k >> nd;
      std::vector<int> shape(std::size_t(nd), 0);
      std::size_t n = 1;
      for (int& d : shape) ls >> d, n *= std::size_t(d);
      std::string vals;
      std::getline(in, vals);
      std::istringstream vs(vals);
      std::vector<float> v(n);
      for (float& x : v)
        if (!(vs >> x)) throw std::runtime_error(cur.name + ": tensor '" + k + "' is short");
      cur.tensors[k] = std::move(v);
      cur.shapes[k] = std::move(shape);
    } else if (kw == "end") {
      cases[cur.name] = cur;
    }
  }
  return cases;
}

}  // namespace tessera::quant::test
