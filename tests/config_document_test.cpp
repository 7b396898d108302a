// config_document_test.cpp — YAML settings: defaults, overrides and located errors.
#include <doctest/doctest.h>

#include <string>

#include "audio/audio_config_yaml.h"
#include "audio/config_document.h"
#include "audio/error.h"

using namespace tessera;

namespace {

audio::AudioConfig audio_of(const std::string& yaml, std::vector<std::string> sets = {}) {
  ConfigDocument d = ConfigDocument::parse(yaml, "exp.yaml");
  for (const auto& s : sets) d.apply_override(s);
  d.check_sections({"audio", "model", "codebooks", "train"});
  ConfigSection s = d.section("audio");
  return audio::read_audio_config(s);
}

std::string error_of(const std::string& yaml, std::vector<std::string> sets = {}) {
  try { audio_of(yaml, sets); } catch (const Error& e) { return e.what(); }
  return "no error";
}

}  // namespace

TEST_CASE("defaults are the reference 16 kHz front end") {
  const audio::AudioConfig c = audio_of("");
  CHECK(c.sample_rate == 16000);
  CHECK(c.n_fft == 1024);
  CHECK(c.hop_length == 160);
  CHECK(c.n_mels == 80);
  CHECK(c.f_max == 8000.0);
  CHECK(c.mel_scale == audio::MelScale::slaney);
  CHECK(c.inversion == audio::Inversion::mel_consistent);
  CHECK(c.griffin_lim_iters == 64);
}

TEST_CASE("values, derived defaults and overrides") {
  const audio::AudioConfig c = audio_of("audio:\n  sample_rate: 8000\n  n_fft: 512\n  n_mels: 64\n",
                                        {"audio.mel_scale=htk", "audio.griffin_lim_iters=10"});
  CHECK(c.sample_rate == 8000);
  CHECK(c.hop_length == 80);   // 10 ms at 8 kHz
  CHECK(c.win_length == 512);  // the window fills the FFT unless set
  CHECK(c.f_max == 4000.0);    // Nyquist unless set
  CHECK(c.mel_scale == audio::MelScale::htk);
  CHECK(c.griffin_lim_iters == 10);
}

TEST_CASE("errors name the file, the line and the key") {
  CHECK(error_of("audio:\n  sample_rate: 16000\n  n_fftt: 512\n") ==
        "exp.yaml:3: audio.n_fftt: unknown key; audio takes f_max, f_min, griffin_lim_iters, "
        "hop_length, inversion, log_floor, mel_norm_area, mel_scale, momentum, n_fft, n_mels, "
        "nnls_iters, normalize_dbfs, normalize_input, output_peak_dbfs, sample_rate, win_length");
  CHECK(error_of("audio:\n  n_fft: big\n") == "exp.yaml:2: audio.n_fft: expected an integer, got 'big'");
  CHECK(error_of("audio:\n\n  n_mels: -3\n") ==
        "exp.yaml:3: audio.n_mels: expected an integer from 1 to 1024, got -3");
  CHECK(error_of("audio:\n  mel_scale: bark\n") ==
        "exp.yaml:2: audio.mel_scale: expected one of slaney, htk, got 'bark'");
  CHECK(error_of("audio:\n  n_fft: 512\n  hop_length: 600\n").find("exp.yaml:3: audio.hop_length: the hop (600) cannot exceed the window (512)") == 0);
  CHECK(error_of("audio:\n  n_fft: 64\n  n_mels: 80\n").find("exp.yaml:3: audio.n_mels:") == 0);
  CHECK(error_of("audio:\n  f_max: 9000\n").find("exp.yaml:2: audio.f_max: must not exceed") == 0);
  CHECK(error_of("audio:\n  n_fft: [1, 2]\n") == "exp.yaml:2: audio.n_fft: expected a single value, got a list");
  CHECK(error_of("oudio:\n  n_fft: 512\n").find("exp.yaml:1: unknown section 'oudio'") == 0);
  CHECK(error_of("audio:\n  n_fft: 512\n   bad: [\n").find("exp.yaml:") == 0);
  CHECK(error_of("", {"audio.n_fft=abc"}) == "--set audio.n_fft: expected an integer, got 'abc'");
  CHECK(error_of("", {"n_fft=512"}) == "--set 'n_fft=512': expected section.key=value");
}

TEST_CASE("the resolved settings round-trip through YAML") {
  const audio::AudioConfig a = audio_of("audio:\n  sample_rate: 8000\n  n_fft: 512\n  n_mels: 64\n  inversion: nnls\n");
  YAML::Node root;
  root["audio"] = audio::to_yaml(a);
  const audio::AudioConfig b = audio_of(emit_yaml(root));
  CHECK(b.sample_rate == a.sample_rate);
  CHECK(b.hop_length == a.hop_length);
  CHECK(b.f_max == a.f_max);
  CHECK(b.inversion == audio::Inversion::nnls);
  CHECK(b.log_floor == a.log_floor);
}

// Found by fuzz_config (tests/fuzz/regressions/config/): YAML allows a mapping or a list as
// a key ("? key: value" is an explicit complex key, YAML 1.2 spec section 8.2.2); yaml-cpp
// then threw its own conversion exception, which escaped as an uncaught exception.
TEST_CASE("a mapping or a list used as a key is refused with its line") {
  CHECK(error_of("audio:\n  sample_rate: 8000\n? n_mels: 64\n") == "exp.yaml:3: expected a plain key, got a mapping");
  CHECK(error_of("audio:\n  ? [n_fft, 2]\n  : 512\n") == "exp.yaml:2: expected a plain key, got a list");
}
