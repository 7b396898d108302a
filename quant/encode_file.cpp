// encode_file.cpp — Tokenizer::encode_file: audio file → codes through the streaming pieces
// (AudioStream → LogMelStream → ChunkedEncoder), in memory that does not grow with the file.
#include <algorithm>

#include "audio/audio_stream.h"
#include "audio/log_mel_stream.h"
#include "quant/tokenizer.h"

namespace tessera::quant {

Eigen::MatrixXi Tokenizer::encode_file(const std::string& path, int depth, const double* normalize_dbfs,
                                       double* duration, audio::SourceInfo* source) {
  if (depth == 0) depth = stages();
  audio::AudioStream in(path, sample_rate(), normalize_dbfs);
  // Frames and code frames follow from the length (stft.h: 1 + L / hop_length).
  const std::int64_t frames = 1 + in.length() / cfg_.audio.hop_length;
  Eigen::MatrixXi codes(Eigen::Index(frames / hop()), std::max(depth, 1));
  Eigen::Index row = 0;
  ChunkedEncoder enc(*this, depth, ChunkedEncoder::append_to(codes, row));
  audio::LogMelStream mel(cfg_.audio, [&](const Eigen::Ref<const Eigen::MatrixXf>& f) { enc.push(f); });
  std::vector<float> block(4096);
  while (const std::size_t n = in.read(block.data(), block.size())) mel.push(block.data(), n);
  mel.finish();
  enc.finish();
  if (duration) *duration = in.duration();
  if (source) *source = in.source();
  codes.conservativeResize(row, depth);
  return codes;
}

}  // namespace tessera::quant
