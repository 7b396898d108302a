// conv_reference.h — naive nested-loop convolutions in PyTorch's layouts, accumulated in
// double: the reference the GEMM layers are tested against (not for production use).
// B batch, C channels, T frames, k taps.
// Layouts (row-major): x [B][C_in][T_in], y [B][C_out][T_out];
// Conv1d weight [C_out][C_in][k]; ConvTranspose1d weight [C_in][C_out][k].
#pragma once
#include <cstddef>
#include <vector>

namespace tessera::quant::reference {

struct ConvDims {
  int B, c_in, c_out, t_in, t_out, k, stride, dilation, pad_left;
};

// y[b,o,t] = bias[o] + Σ_{i,j} w[o,i,j]·x[b,i,s·t + d·j − pad_left]   (torch.nn.Conv1d).
inline std::vector<double> conv1d_forward(const ConvDims& n, const std::vector<float>& x,
                                          const std::vector<float>& w, const std::vector<float>& bias) {
  std::vector<double> y(std::size_t(n.B) * n.c_out * n.t_out);
  for (int b = 0; b < n.B; ++b)
    for (int o = 0; o < n.c_out; ++o)
      for (int t = 0; t < n.t_out; ++t) {
        double acc = bias[o];
        for (int i = 0; i < n.c_in; ++i)
          for (int j = 0; j < n.k; ++j) {
            const int u = n.stride * t + n.dilation * j - n.pad_left;
            if (u < 0 || u >= n.t_in) continue;
            acc += double(w[(std::size_t(o) * n.c_in + i) * n.k + j]) * x[(std::size_t(b) * n.c_in + i) * n.t_in + u];
          }
        y[(std::size_t(b) * n.c_out + o) * n.t_out + t] = acc;
      }
  return y;
}

// Gradients of Σ dy·y with respect to x, w and bias (fresh, not accumulated).
inline void conv1d_backward(const ConvDims& n, const std::vector<float>& dy, const std::vector<float>& x,
                            const std::vector<float>& w, std::vector<double>& dx, std::vector<double>& dw,
                            std::vector<double>& db) {
  dx.assign(std::size_t(n.B) * n.c_in * n.t_in, 0.0);
  dw.assign(std::size_t(n.c_out) * n.c_in * n.k, 0.0);
  db.assign(std::size_t(n.c_out), 0.0);
  for (int b = 0; b < n.B; ++b)
    for (int o = 0; o < n.c_out; ++o)
      for (int t = 0; t < n.t_out; ++t) {
        const double g = dy[(std::size_t(b) * n.c_out + o) * n.t_out + t];
        db[o] += g;
        for (int i = 0; i < n.c_in; ++i)
          for (int j = 0; j < n.k; ++j) {
            const int u = n.stride * t + n.dilation * j - n.pad_left;
            if (u < 0 || u >= n.t_in) continue;
            const std::size_t wi = (std::size_t(o) * n.c_in + i) * n.k + j;
            const std::size_t xi = (std::size_t(b) * n.c_in + i) * n.t_in + u;
            dw[wi] += g * x[xi];
            dx[xi] += g * w[wi];
          }
      }
}

// y[b,o,s·t + j − pad] += w[i,o,j]·x[b,i,t], plus bias   (torch.nn.ConvTranspose1d, dilation 1).
inline std::vector<double> conv_transpose1d_forward(const ConvDims& n, const std::vector<float>& x,
                                                    const std::vector<float>& w, const std::vector<float>& bias) {
  std::vector<double> y(std::size_t(n.B) * n.c_out * n.t_out);
  for (int b = 0; b < n.B; ++b)
    for (int o = 0; o < n.c_out; ++o)
      for (int u = 0; u < n.t_out; ++u) y[(std::size_t(b) * n.c_out + o) * n.t_out + u] = bias[o];
  for (int b = 0; b < n.B; ++b)
    for (int i = 0; i < n.c_in; ++i)
      for (int t = 0; t < n.t_in; ++t)
        for (int o = 0; o < n.c_out; ++o)
          for (int j = 0; j < n.k; ++j) {
            const int u = n.stride * t + j - n.pad_left;
            if (u < 0 || u >= n.t_out) continue;
            y[(std::size_t(b) * n.c_out + o) * n.t_out + u] +=
                double(w[(std::size_t(i) * n.c_out + o) * n.k + j]) * x[(std::size_t(b) * n.c_in + i) * n.t_in + t];
          }
  return y;
}

inline void conv_transpose1d_backward(const ConvDims& n, const std::vector<float>& dy, const std::vector<float>& x,
                                      const std::vector<float>& w, std::vector<double>& dx,
                                      std::vector<double>& dw, std::vector<double>& db) {
  dx.assign(std::size_t(n.B) * n.c_in * n.t_in, 0.0);
  dw.assign(std::size_t(n.c_in) * n.c_out * n.k, 0.0);
  db.assign(std::size_t(n.c_out), 0.0);
  for (int b = 0; b < n.B; ++b)
    for (int o = 0; o < n.c_out; ++o)
      for (int u = 0; u < n.t_out; ++u) db[o] += dy[(std::size_t(b) * n.c_out + o) * n.t_out + u];
  for (int b = 0; b < n.B; ++b)
    for (int i = 0; i < n.c_in; ++i)
      for (int t = 0; t < n.t_in; ++t)
        for (int o = 0; o < n.c_out; ++o)
          for (int j = 0; j < n.k; ++j) {
            const int u = n.stride * t + j - n.pad_left;
            if (u < 0 || u >= n.t_out) continue;
            const double g = dy[(std::size_t(b) * n.c_out + o) * n.t_out + u];
            const std::size_t wi = (std::size_t(i) * n.c_out + o) * n.k + j;
            const std::size_t xi = (std::size_t(b) * n.c_in + i) * n.t_in + t;
            dw[wi] += g * x[xi];
            dx[xi] += g * w[wi];
          }
}

}  // namespace tessera::quant::reference
