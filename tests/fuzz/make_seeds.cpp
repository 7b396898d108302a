// make_seeds.cpp — writes the fuzz seeds that need the library itself, from committed
// inputs: a small valid model file (the config tests/fuzz/seed_model.yaml, weights from a
// fixed seed) and short audio files cut from samples/*.wav, re-encoded in the formats the
// audio path reads (WAV 16-bit and float, stereo WAV, FLAC, OGG/Vorbis, AIFF).
// Usage: fuzz_make_seeds <out_dir>   (writes <out_dir>/model/ and <out_dir>/audio/)
#include <algorithm>
#include <cstdio>
#include <filesystem>
#include <string>
#include <vector>

#include <sndfile.h>

#include "audio/audio_io.h"
#include "audio/error.h"
#include "quant/checkpoint.h"
#include "quant/experiment_config.h"
#include "quant/tokenizer.h"

namespace fs = std::filesystem;
using namespace tessera;

namespace {

void write_audio(const fs::path& path, int format, int channels, const std::vector<float>& mono, int rate) {
  SF_INFO info{};
  info.samplerate = rate;
  info.channels = channels;
  info.format = format;
  SNDFILE* f = sf_open(path.c_str(), SFM_WRITE, &info);
  if (!f) throw Error("cannot write seed '" + path.string() + "': " + sf_strerror(nullptr));
  std::vector<float> frames;
  for (float s : mono)
    for (int c = 0; c < channels; ++c) frames.push_back(c ? -0.5f * s : s);
  sf_writef_float(f, frames.data(), sf_count_t(mono.size()));
  sf_close(f);
}

}  // namespace

int main(int argc, char** argv) {
  if (argc != 2) {
    std::fprintf(stderr, "usage: fuzz_make_seeds <out_dir>\n");
    return 2;
  }
  try {
    const fs::path out = argv[1], src = TESSERA_SOURCE_DIR;
    fs::create_directories(out / "model");
    fs::create_directories(out / "audio");

    const auto cfg = quant::load_experiment((src / "tests/fuzz/seed_model.yaml").string(), {});
    quant::Tokenizer tok(cfg, 1);
    tok.init(7);
    quant::save_model(tok, (out / "model/seed_model.safetensors").string(), 3);

    // 0.05 s from the middle of each sample (speech, not the leading silence): small seeds
    // keep the fuzzer fast.
    for (const auto& entry : fs::directory_iterator(src / "samples")) {
      if (entry.path().extension() != ".wav") continue;
      const auto a = audio::load_audio(entry.path().string());
      const std::size_t n = std::min<std::size_t>(a.samples.size() / 2, std::size_t(a.sample_rate / 20));
      const auto begin = a.samples.begin() + std::ptrdiff_t(a.samples.size() / 2);
      const std::vector<float> cut(begin, begin + std::ptrdiff_t(n));
      const std::string stem = entry.path().stem().string();
      const struct { const char* suffix; int format; int channels; } kinds[] = {
          {"_pcm16.wav", SF_FORMAT_WAV | SF_FORMAT_PCM_16, 1},
          {"_float.wav", SF_FORMAT_WAV | SF_FORMAT_FLOAT, 1},
          {"_stereo.wav", SF_FORMAT_WAV | SF_FORMAT_PCM_24, 2},
          {".flac", SF_FORMAT_FLAC | SF_FORMAT_PCM_16, 1},
          {".ogg", SF_FORMAT_OGG | SF_FORMAT_VORBIS, 1},
          {".aiff", SF_FORMAT_AIFF | SF_FORMAT_PCM_16, 1}};
      for (const auto& k : kinds) write_audio(out / "audio" / (stem + k.suffix), k.format, k.channels, cut, a.sample_rate);
    }
  } catch (const Error& e) {
    std::fprintf(stderr, "error: %s\n", e.what());
    return 1;
  }
  return 0;
}
