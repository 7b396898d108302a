// chunked_encode_test.cpp — long files in bounded memory: streamed log-mel, chunked encoder
// and decoder, streamed reading/resampling. The claims checked: streamed and whole-file
// results are identical bit for bit (codes, log-mel frames), whatever the block and chunk
// sizes; and the chunked encoder/decoder compute the same function as one unchunked pass
// (to float rounding), i.e. the context covers the receptive field.
#include <doctest/doctest.h>

#include <cmath>
#include <filesystem>
#include <numeric>
#include <unistd.h>

#include "audio/audio_io.h"
#include "audio/audio_stream.h"
#include "audio/log_mel.h"
#include "audio/log_mel_stream.h"
#include "audio/resample.h"
#include "quant/experiment_config.h"
#include "quant/tokenizer.h"
#include "synthetic_speech.h"

using namespace tessera;
using namespace tessera::quant;
namespace fs = std::filesystem;

namespace {

ExperimentConfig tiny() {
  return load_experiment("", {"model.channels=16", "model.latent_dim=8", "codebooks.stages=3", "codebooks.codes=16"});
}

// A tiny model whose codebooks come from k-means on its own latents of x, so that codes
// change often from frame to frame (random codebooks would leave most frames on one code).
std::unique_ptr<Tokenizer> tiny_model(const std::vector<float>& x, int threads) {
  auto tok = std::make_unique<Tokenizer>(tiny(), threads);
  tok->init(5);
  Tokenizer one(tiny(), 1);
  one.init(5);  // the same weights
  const Eigen::MatrixXf mel = one.log_mel(x);
  Tensor in(1, 80, int(mel.cols()) / 4 * 4), z;
  in.mat(0) = mel.leftCols(in.T());
  one.encoder().forward(in, z, one.slab(), false);
  tok->codebooks().init_from(z.all());
  return tok;
}

struct TempDir {
  fs::path dir = fs::temp_directory_path() / ("tessera-chunked-" + std::to_string(::getpid()));
  TempDir() { fs::create_directories(dir); }
  ~TempDir() { fs::remove_all(dir); }
};

// Streams samples in blocks of `block` through LogMelStream and a ChunkedEncoder(chunk).
Eigen::MatrixXi streamed_codes(Tokenizer& tok, const std::vector<float>& x, std::size_t block, int chunk) {
  std::vector<int> rows;
  ChunkedEncoder enc(tok, tok.stages(), [&](const Eigen::Ref<const Eigen::MatrixXi>& c) {
    for (Eigen::Index r = 0; r < c.rows(); ++r)
      for (Eigen::Index s = 0; s < c.cols(); ++s) rows.push_back(c(r, s));
  }, chunk);
  audio::LogMelStream mel(tok.config().audio, [&](const Eigen::Ref<const Eigen::MatrixXf>& f) { enc.push(f); });
  for (std::size_t i = 0; i < x.size(); i += block) mel.push(x.data() + i, std::min(block, x.size() - i));
  mel.finish();
  enc.finish();
  Eigen::MatrixXi out(Eigen::Index(rows.size()) / tok.stages(), tok.stages());
  for (Eigen::Index r = 0; r < out.rows(); ++r)
    for (Eigen::Index s = 0; s < out.cols(); ++s) out(r, s) = rows[std::size_t(r * out.cols() + s)];
  return out;
}

// The whole log-mel pushed at once: the whole-file path of Tokenizer::encode for this chunk.
Eigen::MatrixXi whole_codes(Tokenizer& tok, const Eigen::MatrixXf& mel, int chunk) {
  Eigen::MatrixXi out(mel.cols() / tok.hop(), tok.stages());
  Eigen::Index row = 0;
  ChunkedEncoder enc(tok, tok.stages(), [&](const Eigen::Ref<const Eigen::MatrixXi>& c) {
    out.middleRows(row, c.rows()) = c;
    row += c.rows();
  }, chunk);
  enc.push(mel);
  enc.finish();
  REQUIRE(row == out.rows());
  return out;
}

float max_abs(const Eigen::MatrixXf& m) { return m.cwiseAbs().maxCoeff(); }

}  // namespace

TEST_CASE("log-mel frames streamed in any block size equal LogMel::compute bit for bit") {
  const audio::AudioConfig cfg;  // n_fft 1024, hop 160
  for (std::size_t L : {std::size_t(1), std::size_t(300), std::size_t(1023), std::size_t(1024), std::size_t(1025),
                        std::size_t(16077), std::size_t(48000)}) {
    const auto x = testing::synthetic_speech(double(L) / 16000 + 0.01, 16000, 3);
    const std::vector<float> sig(x.begin(), x.begin() + std::ptrdiff_t(L));
    const Eigen::MatrixXf ref = audio::log_mel(cfg, sig);
    for (std::size_t block : {std::size_t(1), std::size_t(7), std::size_t(160), std::size_t(997), std::size_t(100000)}) {
      if (block == 1 && L > 20000) continue;  // slow and adds nothing
      Eigen::MatrixXf got(ref.rows(), 0);
      audio::LogMelStream s(cfg, [&](const Eigen::Ref<const Eigen::MatrixXf>& f) {
        got.conservativeResize(Eigen::NoChange, got.cols() + f.cols());
        got.rightCols(f.cols()) = f;
      });
      for (std::size_t i = 0; i < L; i += block) s.push(sig.data() + i, std::min(block, L - i));
      s.finish();
      CAPTURE(L);
      CAPTURE(block);
      REQUIRE(got.cols() == ref.cols());  // 1 + L / hop (stft.h)
      CHECK(got == ref);
    }
  }
  audio::LogMelStream empty(cfg, [](const Eigen::Ref<const Eigen::MatrixXf>&) {});
  CHECK_THROWS_WITH_AS(empty.finish(), "cannot compute log-mel features of an empty signal", Error);
}

TEST_CASE("3-minute file: streamed encode equals whole-file encode bit for bit, for any block and chunk size") {
  TempDir tmp;
  const auto x = testing::synthetic_speech(180.0, 16000, 21);
  const std::string path = (tmp.dir / "long.wav").string();
  audio::save_wav(path, x, 16000);
  const std::vector<float> samples = audio::load_audio_as(path, 16000).samples;
  auto tok = tiny_model(samples, 1);

  const Eigen::MatrixXi whole = tok->encode(samples);  // all in memory
  double duration = 0;
  const Eigen::MatrixXi streamed = tok->encode_file(path, 0, nullptr, &duration);
  CHECK(duration == doctest::Approx(180.0));
  REQUIRE(whole.rows() == 4500);  // 25 code frames/s; 4500 is no multiple of the default chunk
  CHECK(streamed == whole);
  // The codes move: many distinct first-stage codes, so equality is not trivially met.
  std::vector<int> seen(16, 0);
  for (Eigen::Index r = 0; r < whole.rows(); ++r) seen[std::size_t(whole(r, 0))] = 1;
  CHECK(std::accumulate(seen.begin(), seen.end(), 0) >= 8);

  const Eigen::MatrixXf mel = tok->log_mel(samples);
  for (int chunk : {1, 37, 1000, 4500, 5000}) {
    CAPTURE(chunk);
    const Eigen::MatrixXi ref = whole_codes(*tok, mel, chunk);
    CHECK(streamed_codes(*tok, samples, 997, chunk) == ref);
    CHECK(streamed_codes(*tok, samples, 65536, chunk) == ref);
    // Other chunk sizes round differently (GEMM shapes change) but compute the same
    // function: at most a few frames sit close enough to a boundary between codes to flip.
    CHECK((ref.array() != whole.array()).rowwise().any().count() <= 45);
  }
  CHECK(streamed_codes(*tok, samples, 4096, ChunkedEncoder::kDefaultChunk) == whole);
}

TEST_CASE("files of one chunk, one frame past it, and shorter: streamed equals whole") {
  TempDir tmp;
  const int N = ChunkedEncoder::kDefaultChunk;
  const auto x = testing::synthetic_speech((2 * N + 4) * 0.04, 16000, 4);  // 25 code frames/s
  auto tok = tiny_model(x, 1);
  for (int frames : {1, 2, N - 1, N, N + 1, 2 * N + 3}) {
    CAPTURE(frames);
    // L samples give 1 + L / 160 feature frames (stft.h) and a quarter of that in code frames.
    const std::vector<float> sig(x.begin(), x.begin() + std::ptrdiff_t(4 * frames) * 160);
    const std::string path = (tmp.dir / (std::to_string(frames) + ".wav")).string();
    audio::save_wav(path, sig, 16000);
    const std::vector<float> samples = audio::load_audio_as(path, 16000).samples;
    const Eigen::MatrixXi whole = tok->encode(samples);
    CHECK(whole.rows() == frames);
    CHECK(tok->encode_file(path) == whole);
  }
  const std::string short_path = (tmp.dir / "short.wav").string();
  audio::save_wav(short_path, std::vector<float>(x.begin(), x.begin() + 400), 16000);  // 3 feature frames
  CHECK_THROWS_WITH_AS(tok->encode_file(short_path), "audio too short: needs at least 4 frames", Error);
}

TEST_CASE("codes do not depend on the thread count") {
  const auto x = testing::synthetic_speech(60.0, 16000, 8);
  auto one = tiny_model(x, 1);
  auto two = tiny_model(x, 2);
  CHECK(one->encode(x) == two->encode(x));
  const Eigen::MatrixXi codes = one->encode(x);
  CHECK(one->decode(codes, 3) == two->decode(codes, 3));
}

TEST_CASE("the chunked encoder and decoder compute the unchunked function (context covers the receptive field)") {
  const auto x = testing::synthetic_speech(20.0, 16000, 12);
  Tokenizer tok(tiny(), 1);
  tok.init(9);
  const Eigen::MatrixXf mel = tok.log_mel(x);
  Tensor in(1, 80, int(mel.cols()) / 4 * 4), z;
  in.mat(0) = mel.leftCols(in.T());
  tok.encoder().forward(in, z, tok.slab(), false);  // one lane: one pass over the whole input
  const int T = in.T(), Tz = z.T();
  for (int chunk : {1, 5, 64}) {
    Eigen::MatrixXf zc(z.C(), Tz);
    for (int lo = 0; lo < Tz; lo += chunk) {
      const int hi = std::min(lo + chunk, Tz);
      int a, b;
      tok.encoder().input_range(lo, hi, T, a, b);
      CSeqView xs = in.view();
      xs.data = in.frame(0, a), xs.T = b - a;
      tok.encoder().forward_chunk(0, xs, a, lo, hi, zc.col(lo).data(), tok.slab());
    }
    CAPTURE(chunk);
    CHECK(max_abs(zc - z.mat(0)) <= 1e-5f + 1e-5f * max_abs(z.mat(0)));
  }

  const Eigen::MatrixXi codes = tok.encode(mel, 3);
  Tensor zq(1, 8, int(codes.rows())), y;
  tok.codebooks().decode(codes, 3, zq.all());
  tok.decoder().forward(zq, y, tok.slab(), false);
  const Eigen::MatrixXf ref =
      (y.mat(0).array().colwise() * tok.stats().std.array()).colwise() + tok.stats().mean.array();
  const Eigen::MatrixXf dec = tok.decode(codes, 3);
  REQUIRE(dec.cols() == ref.cols());
  CHECK(max_abs(dec - ref) <= 1e-5f + 1e-5f * max_abs(ref));
  // Streamed in blocks of 7 code frames with 3-frame chunks: identical to one push.
  for (int chunk : {3, ChunkedDecoder::kDefaultChunk}) {
    Eigen::MatrixXf one_push(80, 0), blocks(80, 0);
    auto into = [](Eigen::MatrixXf& m) {
      return [&m](const Eigen::Ref<const Eigen::MatrixXf>& f) {
        m.conservativeResize(Eigen::NoChange, m.cols() + f.cols());
        m.rightCols(f.cols()) = f;
      };
    };
    ChunkedDecoder d1(tok, 3, into(one_push), chunk), d2(tok, 3, into(blocks), chunk);
    d1.push(codes);
    d1.finish();
    for (Eigen::Index r = 0; r < codes.rows(); r += 7) d2.push(codes.middleRows(r, std::min<Eigen::Index>(7, codes.rows() - r)));
    d2.finish();
    CHECK(one_push == blocks);
    CHECK(max_abs(one_push - ref) <= 1e-5f + 1e-5f * max_abs(ref));
  }
}

TEST_CASE("AudioStream: a 44.1 kHz file read block by block matches one-shot resampling") {
  TempDir tmp;
  const auto x = testing::synthetic_speech(3.0, 44100, 2);
  const std::string path = (tmp.dir / "cd.wav").string();
  audio::save_wav(path, x, 44100, audio::SampleFormat::float32, 0.0);
  const std::vector<float> src = audio::load_audio(path).samples;
  const std::vector<float> ref = audio::resample(src, 44100, 16000);
  audio::AudioStream in(path, 16000);
  CHECK(in.length() == std::int64_t(ref.size()));  // round(len · to / from), as resample()
  std::vector<float> got, block(333);
  while (const std::size_t n = in.read(block.data(), block.size())) got.insert(got.end(), block.begin(), block.begin() + std::ptrdiff_t(n));
  REQUIRE(got.size() == ref.size());
  // libsoxr's output does not depend on how the input is fed (its own block processing);
  // allow float rounding all the same.
  float err = 0;
  for (std::size_t i = 0; i < ref.size(); ++i) err = std::max(err, std::fabs(got[i] - ref[i]));
  MESSAGE("max |streamed - one-shot| = " << err);
  CHECK(err <= 1e-6f);
}
