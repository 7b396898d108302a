// model_config.h — the shape of the encoder/decoder, with the reference architecture of
// DESIGN.md as defaults. M mels, C channels, D latent dims. Loading from YAML is done by
// the config loader; validate() is what every constructor of a model relies on.
#pragma once
#include <string>
#include <vector>

#include "audio/error.h"

namespace tessera::quant {

struct ModelConfig {
  int n_mels = 80;                       // M, encoder input / decoder output channels
  int channels = 256;                    // C, width of every hidden layer
  int latent_dim = 128;                  // D, encoder output / decoder input channels
  std::vector<int> strides = {2, 2};     // one down stage (encoder) and up stage (decoder) each
  std::vector<int> dilations = {1, 3, 9};  // residual units per stage, one per dilation
  int residual_kernel = 3;               // taps of the dilated conv of a residual unit
  int kernel_in = 7;                     // encoder and decoder input conv
  int kernel_out = 3;                    // encoder output conv
  int decoder_kernel_out = 7;            // decoder output conv

  // A stride-s stage resamples with kernel 2·s and padding s/2 (the reference uses k4, s2, p1).
  static int stage_kernel(int s) { return 2 * s; }
  static int stage_pad(int s) { return s / 2; }

  // Product of the strides: input frames per latent frame.
  int hop() const {
    int h = 1;
    for (int s : strides) h *= s;
    return h;
  }

  // Throws tessera::Error naming the first bad field.
  void validate() const {
    auto positive = [](const char* field, int v) {
      if (v < 1) throw Error(std::string("model.") + field + ": expected a positive integer, got " + std::to_string(v));
    };
    auto odd = [](const char* field, int v) {
      if (v < 1 || v % 2 == 0)
        throw Error(std::string("model.") + field + ": expected an odd positive kernel (same padding), got " +
                    std::to_string(v));
    };
    positive("n_mels", n_mels);
    positive("channels", channels);
    positive("latent_dim", latent_dim);
    odd("residual_kernel", residual_kernel);
    odd("kernel_in", kernel_in);
    odd("kernel_out", kernel_out);
    odd("decoder_kernel_out", decoder_kernel_out);
    for (int s : strides)
      if (s < 2 || s % 2 != 0)
        throw Error("model.strides: expected even strides >= 2 (kernel 2s, padding s/2), got " + std::to_string(s));
    for (int d : dilations) positive("dilations", d);
  }
};

}  // namespace tessera::quant
