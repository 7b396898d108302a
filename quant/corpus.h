// corpus.h — the training corpus: files found, loaded, resampled and turned into log-mel
// once, held in memory, split deterministically into training and validation parts.
// M mels, T frames.
#pragma once
#include <cstdint>
#include <functional>
#include <random>
#include <string>
#include <vector>

#include <Eigen/Core>

#include "audio/audio_config.h"

namespace tessera::quant {

struct CorpusFile {
  std::string path;       // as opened
  std::string relative;   // below the corpus root; decides the split
  Eigen::MatrixXf log_mel;  // M x T, natural log
  double seconds = 0;
};

struct Corpus {
  std::vector<CorpusFile> train, validation;
  double train_seconds() const;
  double validation_seconds() const;
};

// True when `relative` falls in the validation part: a hash of the relative path (FNV-1a)
// compared with the share, so the split never depends on file order or machine.
bool in_validation(const std::string& relative, double share);

// Loads every audio file of `source` (folder or list file) with `threads` workers.
// Files shorter than `min_frames` are left out (counted in *skipped). At least one file
// goes to each part when there are two or more. Throws tessera::Error naming the corpus
// when nothing usable is found, or naming the file that cannot be read.
Corpus load_corpus(const std::string& source, const audio::AudioConfig& cfg, double validation_share,
                   int min_frames, int threads, int* skipped = nullptr,
                   const std::function<void(std::size_t done, std::size_t total)>& progress = {});

// Per-band statistics of the training part, for normalisation: x' = (x − mean) / std.
struct BandStats {
  Eigen::VectorXf mean, std;  // M each
};
BandStats band_stats(const std::vector<CorpusFile>& files);

// Draws random fixed-length segments from a set of files (longer files drawn more often,
// in proportion to their number of segment starts). Files shorter than a segment are
// padded by repeating their last frame.
class SegmentSampler {
 public:
  SegmentSampler(const std::vector<CorpusFile>& files, int segment_frames);
  // Writes one segment, normalised with `stats`, as M x T into `out` (column-major,
  // one column per frame). `rng` decides which file and where.
  void draw(std::mt19937_64& rng, const BandStats& stats, float* out) const;
  // The i-th of a fixed set of segments (deterministic, for validation).
  void fixed(std::size_t i, std::size_t count, const BandStats& stats, float* out) const;

 private:
  void copy(std::size_t file, long start, const BandStats& stats, float* out) const;
  const std::vector<CorpusFile>& files_;
  int frames_;
  std::vector<double> cumulative_;  // cumulative weights for file choice
};

}  // namespace tessera::quant
