// fuzz_checks.cpp — the contracts of fuzz_checks.h.
#include "tests/fuzz/fuzz_checks.h"

#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>
#include <unistd.h>

#include "audio/audio_io.h"
#include "audio/error.h"
#include "quant/checkpoint.h"
#include "quant/experiment_config.h"
#include "quant/npy.h"
#include "quant/safetensors.h"
#include "quant/token_manifest.h"

namespace tessera::fuzz {
namespace {

[[noreturn]] void broken(const char* what) {
  std::fprintf(stderr, "fuzz contract broken: %s\n", what);
  std::abort();
}

bool same(const quant::ManifestEntry& a, const quant::ManifestEntry& b) {
  return a.source == b.source && a.tokens == b.tokens && a.duration_s == b.duration_s &&
         a.frames == b.frames && a.depth == b.depth && a.sample_rate == b.sample_rate &&
         a.frame_rate == b.frame_rate && a.model_id == b.model_id && a.codebook_size == b.codebook_size;
}

}  // namespace

void check_npy(std::string_view bytes) {
  quant::Int16Matrix m;
  try {
    quant::parse_npy_i16(bytes, "fuzz.npy", m);
  } catch (const Error&) {
    return;
  }
  // The header takes at least 10 bytes, so the data are shorter than the input.
  if (m.rows < 0 || m.cols < 0 || m.data.size() != std::size_t(m.rows * m.cols) || m.data.size() * 2 >= bytes.size())
    broken("npy: data size disagrees with the shape");
}

void check_safetensors(std::string_view bytes) {
  using namespace quant;
  try {
    const SafetensorsReader r("fuzz.safetensors", bytes);
    std::uint64_t total = 0;
    for (const TensorInfo& t : r.tensors()) {
      const auto b = r.bytes(t.name);
      if (b.size() != std::size_t(t.numel()) * dtype_size(t.dtype)) broken("safetensors: tensor size disagrees with its shape");
      total += b.size();
      if (t.dtype == Dtype::f32 && r.get<float>(t.name, t.shape).size() != std::size_t(t.numel()))
        broken("safetensors: get() size disagrees with the shape");
    }
    if (total > bytes.size()) broken("safetensors: tensors hold more bytes than the file");
    for (const auto& [key, value] : r.metadata())
      if (r.metadata_at(key) != value) broken("safetensors: metadata lookup disagrees");
    (void)r.content_id();
  } catch (const Error&) {
  }
}

void check_model(std::string_view bytes) {
  try {
    const quant::SafetensorsReader r("fuzz.safetensors", bytes);
    quant::ModelInfo info;
    const auto tok = quant::load_model(r, /*threads=*/1, &info);
    if (info.model_id != r.content_id()) broken("model: id disagrees with the tensors");
  } catch (const Error&) {
  }
}

void check_config(std::string_view bytes) {
  std::string resolved;
  try {
    resolved = quant::resolved_yaml(quant::parse_experiment(std::string(bytes), "fuzz.yaml"));
  } catch (const Error&) {
    return;
  }
  try {
    if (quant::resolved_yaml(quant::parse_experiment(resolved, "resolved.yaml")) == resolved) return;
    std::fprintf(stderr, "resolved YAML:\n%s", resolved.c_str());
    broken("config: resolved YAML does not read back to itself");
  } catch (const Error& e) {
    std::fprintf(stderr, "%s\nresolved YAML:\n%s", e.what(), resolved.c_str());
    broken("config: resolved YAML is refused");
  }
}

void check_manifest(std::string_view bytes) {
  using namespace quant;
  const std::string text(bytes);
  std::istringstream lenient(text);
  std::vector<std::string> bad;
  for (const ManifestEntry& e : read_manifest(lenient, "fuzz.jsonl", &bad)) {
    if (!stays_inside(e.tokens)) broken("manifest: accepted a tokens path outside the folder");
    if (!same(parse_manifest_line(to_json_line(e), "roundtrip"), e)) broken("manifest: entry does not round-trip");
  }
  std::istringstream strict(text);
  try {
    read_manifest(strict, "fuzz.jsonl");
    if (!bad.empty()) broken("manifest: strict mode accepted what lenient mode skipped");
  } catch (const Error&) {
    if (bad.empty()) broken("manifest: strict mode refused what lenient mode accepted");
  }
}

void check_audio(std::string_view bytes) {
  try {
    audio::SourceInfo info;
    // Through a file, as users' audio arrives: one scratch file per process.
    static const std::string path = [] {
      std::string name = (std::filesystem::temp_directory_path() / "tessera-fuzz-audio-XXXXXX").string();
      const int fd = mkstemp(name.data());
      if (fd >= 0) close(fd);
      return name;
    }();
    {
      std::ofstream f(path, std::ios::binary | std::ios::trunc);
      f.write(bytes.data(), std::streamsize(bytes.size()));
    }
    const audio::Audio a = audio::load_audio(path, &info);
    if (a.samples.empty() || a.sample_rate != info.sample_rate || info.channels < 1) broken("audio: empty or inconsistent");
    for (float s : a.samples)
      if (!std::isfinite(s)) broken("audio: non-finite sample");
  } catch (const Error&) {
  }
}

}  // namespace tessera::fuzz
