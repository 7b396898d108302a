// tokenizer.h — the whole model: normalisation, encoder, residual codebooks, decoder,
// with the inference paths audio → features → codes → features → audio.
// M mels, T frames, L code frames (T / hop), D latent dims, S stages, K codes, d depth.
//
// The library API for other C++ programs (link tessera_quant; no CLI needed):
//
//   auto tok = tessera::quant::Tokenizer::load("model.safetensors");     // throws tessera::Error
//   Eigen::MatrixXi codes = tok->encode(samples);          // mono float samples at
//                                                           // tok->sample_rate(); L x S codes
//   Eigen::MatrixXf mel = tok->decode(codes, /*depth=*/2);  // log-mel from the first 2 stages
//   std::vector<float> audio = tok->synthesize(mel);         // Griffin-Lim, model's settings
//   Eigen::MatrixXi long_codes = tok->encode_file("talk.flac"); // streamed, bounded memory
//
// Long inputs in bounded memory, piece by piece: audio::AudioStream (audio_stream.h) →
// audio::LogMelStream (log_mel_stream.h) → ChunkedEncoder (chunked_encoder.h) → codes, and
// ChunkedDecoder (chunked_decoder.h) → audio::ChunkedSynthesis (chunked_synthesis.h) →
// audio::WavWriter (wav_writer.h). encode/decode below run through the same chunked
// classes, so streamed and in-memory results are identical.
//
// tessera::audio::load_audio_as(path, tok->sample_rate(), nullptr) reads and resamples a
// file. A Tokenizer is not thread-safe (it keeps scratch buffers); use one per thread, or
// give one several threads with `threads`.
#pragma once
#include <memory>
#include <string>

#include <Eigen/Core>

#include "audio/audio_io.h"
#include "quant/chunked_decoder.h"
#include "quant/chunked_encoder.h"
#include "quant/codebook/residual_codebooks.h"
#include "quant/corpus.h"
#include "quant/decoder.h"
#include "quant/encoder.h"
#include "quant/experiment_config.h"
#include "quant/param_slab.h"
#include "quant/tensor.h"
#include "quant/thread_pool.h"

namespace tessera::quant {

class Tokenizer {
 public:
  // Builds the layers of `cfg` with `threads` lanes (0 = all cores); weights are zero
  // until init() or a checkpoint fills them. Throws tessera::Error on a bad config.
  Tokenizer(const ExperimentConfig& cfg, int threads, int max_batch_vectors = 4096);

  // Reads a model written by `tessera train` (checkpoint.h: load_model, which also returns
  // the model id). `threads` 0 = all cores.
  static std::unique_ptr<Tokenizer> load(const std::string& path, int threads = 0);

  // PyTorch-default initialisation of every layer from `seed`.
  void init(std::uint64_t seed);

  const ExperimentConfig& config() const { return cfg_; }
  ParamSlab& slab() { return slab_; }
  const ParamSlab& slab() const { return slab_; }
  Encoder& encoder() { return enc_; }
  Decoder& decoder() { return dec_; }
  ResidualCodebooks& codebooks() { return rvq_; }
  const ResidualCodebooks& codebooks() const { return rvq_; }
  BandStats& stats() { return stats_; }
  const BandStats& stats() const { return stats_; }
  ThreadPool& pool() { return pool_; }
  int hop() const { return cfg_.model.hop(); }
  int sample_rate() const { return cfg_.audio.sample_rate; }
  int stages() const { return cfg_.codebooks.stages; }

  // Mono samples at sample_rate() → codes L x depth (depth 0 = all stages). Throws
  // tessera::Error when the audio is shorter than one code frame or depth is out of range.
  Eigen::MatrixXi encode(const std::vector<float>& samples, int depth = 0);
  // An audio file → codes L x depth (depth 0 = all stages), streamed block by block:
  // memory does not grow with the file's length (audio_stream.h, log_mel_stream.h,
  // chunked_encoder.h), and the codes equal
  // encode(audio::load_audio_as(path, sample_rate(), normalize_dbfs).samples, depth) bit for
  // bit. Only the codes are kept (L·depth ints: 1 h at depth 8 is 2.9 MB). `duration`
  // receives the length in seconds. Throws tessera::Error for a bad or too-short file.
  Eigen::MatrixXi encode_file(const std::string& path, int depth = 0, const double* normalize_dbfs = nullptr,
                              double* duration = nullptr, audio::SourceInfo* source = nullptr);
  // Mono samples → the model's natural-log log-mel M x T (the features it encodes).
  Eigen::MatrixXf log_mel(const std::vector<float>& samples) const;
  // Log-mel M x T → samples at sample_rate() by the model's mel inversion and Griffin-Lim
  // (`iters` < 0: the model's audio.griffin_lim_iters), in overlapping 20 s chunks past
  // 20 s (chunked_synthesis.h). Not peak-limited: audio::save_wav is.
  std::vector<float> synthesize(const Eigen::MatrixXf& log_mel, int iters = -1) const;

  // Natural-log log-mel M x T (unnormalised) → codes L x depth, L = T / hop (frames past
  // the last whole code frame are dropped).
  Eigen::MatrixXi encode(const Eigen::MatrixXf& log_mel, int depth);
  // Codes L x (>= depth) → log-mel M x (L·hop), unnormalised natural log.
  Eigen::MatrixXf decode(const Eigen::MatrixXi& codes, int depth);
  // decode(encode(log_mel, depth), depth): what the first `depth` stages keep.
  Eigen::MatrixXf reconstruct(const Eigen::MatrixXf& log_mel, int depth);

 private:
  ExperimentConfig cfg_;
  ThreadPool pool_;
  ParamSlab slab_;
  Encoder enc_;
  Decoder dec_;
  ResidualCodebooks rvq_;
  BandStats stats_;
};

// Threads for a `threads` setting: 0 means every hardware thread.
int resolve_threads(int threads);

}  // namespace tessera::quant
