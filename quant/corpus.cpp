// corpus.cpp — loading, splitting, statistics and segment sampling of the training corpus.
#include "quant/corpus.h"

#include <algorithm>
#include <atomic>
#include <cmath>
#include <mutex>
#include <thread>

#include "audio/audio_io.h"
#include "audio/error.h"
#include "audio/file_list.h"
#include "audio/log_mel.h"

namespace tessera::quant {

double Corpus::train_seconds() const {
  double s = 0;
  for (const auto& f : train) s += f.seconds;
  return s;
}

double Corpus::validation_seconds() const {
  double s = 0;
  for (const auto& f : validation) s += f.seconds;
  return s;
}

bool in_validation(const std::string& relative, double share) {
  std::uint64_t h = 1469598103934665603ull;  // FNV-1a 64 (Fowler, Noll, Vo)
  for (unsigned char c : relative) { h ^= c; h *= 1099511628211ull; }
  return double(h % 1000000) < share * 1e6;
}

Corpus load_corpus(const std::string& source, const audio::AudioConfig& cfg, double share,
                   int min_frames, int threads, int* skipped,
                   const std::function<void(std::size_t, std::size_t)>& progress) {
  std::vector<audio::InputFile> inputs;
  try {
    inputs = audio::expand_inputs({source});
  } catch (const Error& e) {
    throw Error(std::string("corpus: ") + e.what());
  }
  std::vector<CorpusFile> files(inputs.size());
  std::vector<std::string> errors(inputs.size());
  std::atomic<std::size_t> next{0}, done{0};
  std::mutex progress_lock;
  const double* norm = cfg.normalize_input ? &cfg.normalize_dbfs : nullptr;
  auto worker = [&] {
    for (std::size_t i; (i = next++) < inputs.size();) {
      try {
        const audio::Audio a = audio::load_audio_as(inputs[i].path, cfg.sample_rate, norm);
        files[i] = {inputs[i].path, inputs[i].relative, audio::log_mel(cfg, a.samples), a.duration()};
      } catch (const Error& e) {
        errors[i] = e.what();
      }
      const std::size_t d = ++done;
      if (progress) {
        std::lock_guard<std::mutex> g(progress_lock);
        progress(d, inputs.size());
      }
    }
  };
  const int n = std::max(1, std::min<int>(threads, int(inputs.size())));
  std::vector<std::thread> pool;
  for (int t = 1; t < n; ++t) pool.emplace_back(worker);
  worker();
  for (auto& t : pool) t.join();
  for (std::size_t i = 0; i < inputs.size(); ++i)
    if (!errors[i].empty()) throw Error("corpus '" + source + "': " + errors[i]);

  Corpus c;
  int short_files = 0;
  for (auto& f : files) {
    if (f.log_mel.cols() < min_frames) { ++short_files; continue; }
    (in_validation(f.relative, share) ? c.validation : c.train).push_back(std::move(f));
  }
  if (skipped) *skipped = short_files;
  if (c.train.empty() && c.validation.empty())
    throw Error("corpus '" + source + "': no file is long enough (" + std::to_string(min_frames) +
                " frames at least)");
  // Keep both parts non-empty when there are at least two files.
  if (share > 0 && c.validation.empty() && c.train.size() >= 2) {
    c.validation.push_back(std::move(c.train.back()));
    c.train.pop_back();
  }
  if (c.train.empty() && c.validation.size() >= 2) {
    c.train.push_back(std::move(c.validation.back()));
    c.validation.pop_back();
  }
  if (c.train.empty()) throw Error("corpus '" + source + "': needs at least one training file");
  return c;
}

BandStats band_stats(const std::vector<CorpusFile>& files) {
  const int m = int(files.front().log_mel.rows());
  Eigen::VectorXd sum = Eigen::VectorXd::Zero(m), sq = Eigen::VectorXd::Zero(m);
  double n = 0;
  for (const auto& f : files) {
    const Eigen::MatrixXd x = f.log_mel.cast<double>();
    sum += x.rowwise().sum();
    sq += x.array().square().matrix().rowwise().sum();
    n += double(x.cols());
  }
  BandStats s;
  const Eigen::VectorXd mean = sum / n;
  const Eigen::VectorXd var = (sq / n - mean.array().square().matrix()).cwiseMax(0.0);
  s.mean = mean.cast<float>();
  // A band that never changes (e.g. above a low-pass) keeps unit scale instead of 1/0.
  s.std = var.array().sqrt().max(1e-3).matrix().cast<float>();
  return s;
}

SegmentSampler::SegmentSampler(const std::vector<CorpusFile>& files, int segment_frames)
    : files_(files), frames_(segment_frames) {
  double acc = 0;
  for (const auto& f : files) {
    acc += double(std::max<long>(1, long(f.log_mel.cols()) - frames_ + 1));
    cumulative_.push_back(acc);
  }
}

void SegmentSampler::copy(std::size_t file, long start, const BandStats& stats, float* out) const {
  const Eigen::MatrixXf& x = files_[file].log_mel;
  const long m = x.rows(), t = x.cols();
  for (int j = 0; j < frames_; ++j) {
    const long col = std::min(t - 1, start + j);
    Eigen::Map<Eigen::VectorXf>(out + std::size_t(j) * m, m) =
        (x.col(col) - stats.mean).cwiseQuotient(stats.std);
  }
}

void SegmentSampler::draw(std::mt19937_64& rng, const BandStats& stats, float* out) const {
  const double u = std::uniform_real_distribution<double>(0, cumulative_.back())(rng);
  const std::size_t file = std::size_t(std::upper_bound(cumulative_.begin(), cumulative_.end(), u) -
                                       cumulative_.begin());
  const std::size_t f = std::min(file, files_.size() - 1);
  const long starts = std::max<long>(1, long(files_[f].log_mel.cols()) - frames_ + 1);
  const long start = long(std::uniform_int_distribution<long>(0, starts - 1)(rng));
  copy(f, start, stats, out);
}

void SegmentSampler::fixed(std::size_t i, std::size_t count, const BandStats& stats, float* out) const {
  // Spread `count` segments evenly over the concatenated starts of all files.
  const double pos = (double(i) + 0.5) / double(count) * cumulative_.back();
  const std::size_t f = std::min<std::size_t>(
      std::size_t(std::upper_bound(cumulative_.begin(), cumulative_.end(), pos) - cumulative_.begin()),
      files_.size() - 1);
  const double before = f == 0 ? 0.0 : cumulative_[f - 1];
  copy(f, long(pos - before), stats, out);
}

}  // namespace tessera::quant
