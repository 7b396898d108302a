// figures.h — what `tessera bench` collects (every timed run of every piece, per side and
// thread count) and its two renderings: a table for people and one JSON object.
// RTF = seconds of audio per wall-clock second.
#pragma once
#include <map>
#include <optional>
#include <string>
#include <vector>

namespace tessera::bench {

// One kind of work at several thread counts.
struct Piece {
  std::map<int, std::vector<double>> ms;  // every timed run, by thread count
  std::map<int, double> peak_mb;          // largest ru_maxrss of its processes
  void add(int threads, const std::vector<double>& runs, double peak);
};

struct Side {
  Piece train, encode, decode, resynth;
  double utterance_s = 0;     // audio per encode / decode run
  std::vector<double> loads;  // other processes' load during each run
};

struct Figures {
  std::string config;          // what was measured ("configs/bench.yaml", …)
  std::vector<int> threads;
  int repeats = 0, warmup = 0, rounds = 0;
  double train_audio_s = 0;    // audio in one training batch
  double resynth_s = 0;        // audio per resynthesis run
  int resynth_iters = 0;
  std::string resynth_method;
  Side tessera;
  std::optional<Side> peer;
  std::string peer_script, peer_blas;
  double long_s = 0, long_peak_mb = 0, long_wall_s = 0;  // `tessera encode` of the long file
};

std::string figures_json(const Figures& f);  // one line
void print_table(const Figures& f);          // to stdout

}  // namespace tessera::bench
