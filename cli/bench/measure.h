// measure.h — what every timing in tessera's benchmarks shares: repeated runs with warm-up,
// median and spread, the load other processes put on the machine meanwhile, and the
// `--threads 1,2` list. Used by `tessera bench` and the tests/bench programs.
#pragma once
#include <chrono>
#include <string>
#include <vector>

namespace tessera::bench {

// Median and range of a set of timings (or rates).
struct Spread {
  double median = 0, min = 0, max = 0;
  int n = 0;
};
Spread spread_of(std::vector<double> v);
double median_of(std::vector<double> v);

// Milliseconds of `repeats` runs of fn after `warmup` untimed ones, in run order.
template <class F>
std::vector<double> time_ms(int warmup, int repeats, F&& fn) {
  std::vector<double> ms;
  for (int r = 0; r < warmup + repeats; ++r) {
    const auto t0 = std::chrono::steady_clock::now();
    fn();
    const double dt = std::chrono::duration<double, std::milli>(std::chrono::steady_clock::now() - t0).count();
    if (r >= warmup) ms.push_back(dt);
  }
  return ms;
}

double now_ms();          // steady clock
double process_cpu_ms();  // CPU time of this process, all threads

// Share of the machine's CPU time used by other processes between construction and
// fraction(), as torch_reference.py's other_process_cpu_fraction: 0 idle, 0.5 = one of two
// cores kept busy by someone else; −1 where /proc/stat is missing. Counts this process
// only (not its children): start it inside the process being timed.
class OtherLoad {
 public:
  OtherLoad();
  double fraction() const;

 private:
  double busy0_, cpu0_, wall0_;
};

// "1,2" → {1, 2}; throws tessera::Error on anything but positive integers.
std::vector<int> parse_thread_list(const std::string& s);

}  // namespace tessera::bench
