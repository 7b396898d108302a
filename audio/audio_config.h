// audio_config.h — the typed `audio:` section of an experiment file, with defaults.
// Defaults are the reference 16 kHz front end of DESIGN.md. Loading from YAML and
// validation live in config_yaml.h; this header has no dependencies.
#pragma once
#include <string>

namespace tessera::audio {

enum class MelScale { slaney, htk };
// How log-mel goes back to audio (see DESIGN.md, "What was measured about the inversion").
enum class Inversion {
  mel_consistent,  // default: pseudo-inverse start, fast GL re-imposing the mel each iteration
  fast,            // pseudo-inverse start, fixed magnitude, fast GL (Perraudin et al. 2013)
  plain,           // pseudo-inverse start, fixed magnitude, plain GL (Griffin & Lim 1984)
  nnls,            // projected-gradient NNLS magnitude, fixed, then fast GL
};

struct AudioConfig {
  int sample_rate = 16000;     // Hz; input audio is resampled to this
  int n_fft = 1024;            // FFT size; bins F = n_fft/2 + 1
  int win_length = 1024;       // Hann window length, <= n_fft (zero-padded, centred)
  int hop_length = 160;        // samples between frames (100 frames/s at 16 kHz)
  int n_mels = 80;             // mel bands M
  double f_min = 0.0;          // Hz, lowest filter edge
  double f_max = 8000.0;       // Hz, highest filter edge, <= sample_rate/2
  MelScale mel_scale = MelScale::slaney;
  bool mel_norm_area = true;   // Slaney-style area normalisation of each filter (2/(f_hi-f_lo))
  double log_floor = 1e-5;     // log(max(mel, floor)), natural log
  Inversion inversion = Inversion::mel_consistent;
  int griffin_lim_iters = 64;
  double momentum = 0.99;      // fast Griffin-Lim momentum α
  int nnls_iters = 200;        // projected-gradient steps for Inversion::nnls
  bool normalize_input = false;  // peak-normalise loaded audio to normalize_dbfs
  double normalize_dbfs = -1.0;
  double output_peak_dbfs = -1.0;  // saved audio is peak-limited to this level

  int n_bins() const { return n_fft / 2 + 1; }
  double frame_rate() const { return double(sample_rate) / hop_length; }
};

const char* to_string(MelScale s);
const char* to_string(Inversion m);

}  // namespace tessera::audio
