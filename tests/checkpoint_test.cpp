// checkpoint_test.cpp — the model file: round trip, identity, and refusal of damaged files.
#include <doctest/doctest.h>

#include <filesystem>
#include <fstream>
#include <unistd.h>

#include "audio/error.h"
#include "audio/log_mel.h"
#include "quant/checkpoint.h"
#include "quant/safetensors.h"
#include "synthetic_speech.h"

using namespace tessera;
using namespace tessera::quant;
namespace fs = std::filesystem;

namespace {

ExperimentConfig small() {
  return load_experiment("", {"model.channels=24", "model.latent_dim=8", "codebooks.stages=3", "codebooks.codes=16",
                              "codebooks.kmeans_init_vectors=64"});
}

std::string read_bytes(const fs::path& p) {
  std::ifstream in(p, std::ios::binary);
  return {std::istreambuf_iterator<char>(in), {}};
}

void write_bytes(const fs::path& p, const std::string& b) { std::ofstream(p, std::ios::binary) << b; }

}  // namespace

TEST_CASE("a saved model loads back to the same weights, codes and id") {
  const fs::path dir = fs::temp_directory_path() / ("tessera-ckpt-" + std::to_string(::getpid()));
  fs::create_directories(dir);
  Tokenizer a(small(), 1);
  a.init(5);
  a.stats().mean.setConstant(-3.0f);
  a.stats().std.setConstant(2.0f);
  const std::string id = save_model(a, (dir / "m.safetensors").string(), 42);
  CHECK(id.size() == 16);

  ModelInfo info;
  auto b = load_model((dir / "m.safetensors").string(), 1, &info);
  CHECK(info.model_id == id);
  CHECK(info.step == 42);
  CHECK(std::equal(a.slab().params(), a.slab().params() + a.slab().count(), b->slab().params()));
  CHECK(b->stats().std[3] == 2.0f);

  const auto x = testing::synthetic_speech(1.0, 16000, 3);
  const Eigen::MatrixXf mel = audio::log_mel(small().audio, x);
  const Eigen::MatrixXi ca = a.encode(mel, 3), cb = b->encode(mel, 3);
  CHECK(ca == cb);
  CHECK(ca.rows() == mel.cols() / 4);
  const Eigen::MatrixXf back = b->decode(cb, 2);
  CHECK(back.rows() == 80);
  CHECK(back.cols() == ca.rows() * 4);
  // Saving the same model again gives the same id (the hash covers tensors, not metadata).
  CHECK(save_model(*b, (dir / "again.safetensors").string(), 7) == id);
  fs::remove_all(dir);
}

TEST_CASE("damaged or foreign model files are refused with the file's name") {
  const fs::path dir = fs::temp_directory_path() / ("tessera-ckpt-bad-" + std::to_string(::getpid()));
  fs::create_directories(dir);
  Tokenizer a(small(), 1);
  a.init(5);
  save_model(a, (dir / "m.safetensors").string(), 1);
  const std::string good = read_bytes(dir / "m.safetensors");
  auto message = [&](const std::string& bytes) {
    write_bytes(dir / "bad.safetensors", bytes);
    try { load_model((dir / "bad.safetensors").string(), 1); } catch (const Error& e) { return std::string(e.what()); }
    return std::string("no error");
  };
  CHECK(message(good.substr(0, good.size() / 2)).find("bad.safetensors") != std::string::npos);
  CHECK(message(good.substr(0, 5)).find("bad.safetensors") != std::string::npos);
  // One weight byte flipped: the id no longer matches.
  std::string flipped = good;
  flipped[flipped.size() - 100] ^= 0x40;
  CHECK(message(flipped).find("model id") != std::string::npos);
  // The format name edited (same length so offsets stay valid).
  std::string foreign = good;
  const auto at = foreign.find("tessera-model");
  REQUIRE(at != std::string::npos);
  foreign.replace(at, 13, "someone-model");
  CHECK(message(foreign).find("not a tessera model") != std::string::npos);
  CHECK(message("").find("bad.safetensors") != std::string::npos);
  fs::remove_all(dir);
}

// A model file is untrusted: its stored config must not make the loader allocate more than
// the file could hold. (Before the check, 600 bytes naming a 4096-channel model asked for
// over 100 GB: fuzz_model stopped with out-of-memory on the hand-made input
// tests/fuzz/regressions/model/huge_config.safetensors.)
TEST_CASE("a small file whose stored config names a huge model is refused before allocating") {
  ExperimentConfig big = load_experiment("", {"model.channels=4096", "model.latent_dim=4096", "model.strides=[2, 2, 2, 2, 2, 2]",
                                              "model.residual_kernel=63", "codebooks.restart_pool=1000000",
                                              "train.segment_frames=640"});
  SafetensorsWriter w;
  w.set_metadata("format", kModelFormat);
  w.set_metadata("format_version", std::to_string(kModelFormatVersion));
  w.set_metadata("config", resolved_yaml(big));
  const fs::path p = fs::temp_directory_path() / ("tessera-ckpt-huge-" + std::to_string(::getpid()) + ".safetensors");
  w.write(p.string());
  std::string msg = "no error";
  try { load_model(p.string(), 1); } catch (const Error& e) { msg = e.what(); }
  CHECK(msg.find("describes a model of at least") != std::string::npos);
  CHECK(msg.find("holds 0 bytes of tensors") != std::string::npos);
  // Through the in-memory reader (what fuzz_model feeds), the same refusal.
  const SafetensorsReader r("mem.safetensors", read_bytes(p));
  CHECK_THROWS_AS(load_model(r, 1), Error);
  fs::remove(p);
}

TEST_CASE("a model's minimum size check accepts every real model (the smallest and the default)") {
  for (const ExperimentConfig& cfg : {small(), load_experiment("", {})}) {
    Tokenizer a(cfg, 1);
    a.init(3);
    const fs::path p = fs::temp_directory_path() / ("tessera-ckpt-min-" + std::to_string(::getpid()) + ".safetensors");
    save_model(a, p.string(), 0);
    CHECK_NOTHROW(load_model(p.string(), 1));
    fs::remove(p);
  }
}
