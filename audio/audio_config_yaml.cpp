// audio_config_yaml.cpp — keys, ranges and cross-checks of the `audio:` section.
#include "audio/audio_config_yaml.h"

#include <algorithm>
#include <string>

namespace tessera::audio {

AudioConfig read_audio_config(ConfigSection& s) {
  AudioConfig c;
  s.get_int("sample_rate", c.sample_rate, 4000, 192000);
  s.get_int("n_fft", c.n_fft, 16, 65536);
  c.win_length = c.n_fft;  // default: the window fills the FFT
  s.get_int("win_length", c.win_length, 2, 65536);
  c.hop_length = std::max(1, std::min(c.win_length, c.sample_rate / 100));  // 10 ms frames
  s.get_int("hop_length", c.hop_length, 1, 65536);
  s.get_int("n_mels", c.n_mels, 1, 1024);
  s.get_double("f_min", c.f_min, 0.0, 1e6);
  c.f_max = c.sample_rate / 2.0;
  s.get_double("f_max", c.f_max, 0.0, 1e6);
  s.get_enum("mel_scale", c.mel_scale, {{"slaney", MelScale::slaney}, {"htk", MelScale::htk}});
  s.get("mel_norm_area", c.mel_norm_area);
  s.get_double("log_floor", c.log_floor, 1e-12, 1.0);
  s.get_enum("inversion", c.inversion,
             {{"mel_consistent", Inversion::mel_consistent}, {"fast", Inversion::fast},
              {"plain", Inversion::plain}, {"nnls", Inversion::nnls}});
  s.get_int("griffin_lim_iters", c.griffin_lim_iters, 0, 100000);
  s.get_double("momentum", c.momentum, 0.0, 1.5);
  s.get_int("nnls_iters", c.nnls_iters, 0, 100000);
  s.get("normalize_input", c.normalize_input);
  s.get_double("normalize_dbfs", c.normalize_dbfs, -60.0, 0.0);
  s.get_double("output_peak_dbfs", c.output_peak_dbfs, -60.0, 0.0);
  s.finish();

  if (c.win_length > c.n_fft)
    s.fail("win_length", "the window (" + std::to_string(c.win_length) + ") cannot exceed n_fft (" +
                             std::to_string(c.n_fft) + ")");
  if (c.hop_length > c.win_length)
    s.fail("hop_length", "the hop (" + std::to_string(c.hop_length) +
                             ") cannot exceed the window (" + std::to_string(c.win_length) +
                             "): samples between frames would be lost");
  if (c.f_max > c.sample_rate / 2.0)
    s.fail("f_max", "must not exceed half the sample rate (" + std::to_string(c.sample_rate / 2) + " Hz)");
  if (c.f_min >= c.f_max) s.fail("f_min", "must be below f_max");
  if (c.n_mels > c.n_bins())
    s.fail("n_mels", std::to_string(c.n_mels) + " mel bands need at least as many FFT bins; n_fft " +
                         std::to_string(c.n_fft) + " gives " + std::to_string(c.n_bins()));
  return c;
}

YAML::Node to_yaml(const AudioConfig& c) {
  YAML::Node n(YAML::NodeType::Map);
  n["sample_rate"] = c.sample_rate;
  n["n_fft"] = c.n_fft;
  n["win_length"] = c.win_length;
  n["hop_length"] = c.hop_length;
  n["n_mels"] = c.n_mels;
  n["f_min"] = c.f_min;
  n["f_max"] = c.f_max;
  n["mel_scale"] = to_string(c.mel_scale);
  n["mel_norm_area"] = c.mel_norm_area;
  n["log_floor"] = c.log_floor;
  n["inversion"] = to_string(c.inversion);
  n["griffin_lim_iters"] = c.griffin_lim_iters;
  n["momentum"] = c.momentum;
  n["nnls_iters"] = c.nnls_iters;
  n["normalize_input"] = c.normalize_input;
  n["normalize_dbfs"] = c.normalize_dbfs;
  n["output_peak_dbfs"] = c.output_peak_dbfs;
  return n;
}

}  // namespace tessera::audio
