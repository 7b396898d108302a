// depth_ladder_test.cpp — rate and distortion bookkeeping of one utterance per depth.
#include <doctest/doctest.h>

#include <cmath>

#include "quant/depth_ladder.h"
#include "synthetic_speech.h"

using namespace tessera;
using namespace tessera::quant;

TEST_CASE("nominal bitrate = frame rate x depth x log2 K") {
  // 1024 codes carry 10 bits (common practice): 25 frames/s x 8 stages x 10 bits = 2.0 kbps,
  // 250 bit/s at depth 1 (the reference architecture's figures).
  CHECK(nominal_kbps(25, 8, 1024) == doctest::Approx(2.0));
  CHECK(nominal_kbps(25, 1, 1024) == doctest::Approx(0.25));
  // The demo model: 4 x 256 codes (8 bits) at 25 frames/s = 800 bit/s.
  CHECK(nominal_kbps(25, 4, 256) == doctest::Approx(0.8));
  // The reference front end gives 25 code frames/s: 16000 / 160 hop / stride 4.
  const ExperimentConfig ref = load_experiment("", {});
  CHECK(ref.code_rate() == doctest::Approx(25.0));
  CHECK(nominal_kbps(ref.code_rate(), ref.codebooks.stages, ref.codebooks.codes) == doctest::Approx(2.0));
}

TEST_CASE("the entropy bound never exceeds the nominal rate and adds stage by stage") {
  std::vector<StageUsage> st(3);
  st[0].entropy_bits = 3.5, st[1].entropy_bits = 4.0, st[2].entropy_bits = 2.0;
  CHECK(entropy_kbps(st, 1, 25) == doctest::Approx(25 * 3.5 / 1000));
  CHECK(entropy_kbps(st, 3, 25) == doctest::Approx(25 * 9.5 / 1000));
  CHECK(entropy_kbps(st, 3, 25) <= nominal_kbps(25, 3, 16) + 1e-12);
}

TEST_CASE("a ladder has one row per depth, the oracle beside them, and re-encode shares") {
  const ExperimentConfig cfg = load_experiment(
      "", {"model.channels=16", "model.latent_dim=8", "codebooks.stages=3", "codebooks.codes=16", "audio.griffin_lim_iters=8"});
  Tokenizer tok(cfg, 1);
  tok.init(2);
  const auto x = testing::synthetic_speech(1.2, 16000, 5);
  const Ladder lad = depth_ladder(tok, x, {}, /*keep_audio=*/true);
  REQUIRE(lad.depths.size() == 3);
  for (int d = 0; d < 3; ++d) {
    CHECK(lad.depths[std::size_t(d)].depth == d + 1);
    CHECK(lad.depths[std::size_t(d)].kbps == doctest::Approx(nominal_kbps(25, d + 1, 16)));
    CHECK(lad.audio[std::size_t(d)].size() > 0);
    // An untrained decoder is far from the truth; the oracle (true log-mel) is the ceiling.
    CHECK(lad.oracle.mcd_db < lad.depths[std::size_t(d)].mcd_db);
    CHECK(lad.oracle.mel_l1 < lad.depths[std::size_t(d)].mel_l1);
  }
  REQUIRE(lad.reencode_agreement.size() == 3);
  for (double r : lad.reencode_agreement) CHECK((r >= 0 && r <= 1));
  CHECK(lad.codes.cols() == 3);
  CHECK_THROWS_AS(depth_ladder(tok, x, {0}, false), tessera::Error);
  CHECK_THROWS_AS(depth_ladder(tok, x, {4}, false), tessera::Error);
}
