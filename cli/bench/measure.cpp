// measure.cpp — medians, clocks and the other-process load from /proc/stat.
#include "cli/bench/measure.h"

#include <time.h>
#include <unistd.h>

#include <algorithm>
#include <cstdio>
#include <sstream>

#include "audio/error.h"

namespace tessera::bench {

double median_of(std::vector<double> v) {
  if (v.empty()) return 0;
  std::sort(v.begin(), v.end());
  const std::size_t n = v.size();
  return n % 2 ? v[n / 2] : 0.5 * (v[n / 2 - 1] + v[n / 2]);
}

Spread spread_of(std::vector<double> v) {
  if (v.empty()) return {};
  const auto [lo, hi] = std::minmax_element(v.begin(), v.end());
  return {median_of(v), *lo, *hi, int(v.size())};
}

double now_ms() {
  return std::chrono::duration<double, std::milli>(std::chrono::steady_clock::now().time_since_epoch()).count();
}

double process_cpu_ms() {
  timespec ts{};
  clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &ts);
  return double(ts.tv_sec) * 1e3 + double(ts.tv_nsec) / 1e6;
}

namespace {
// Busy CPU time of the whole machine in ms: the first line of /proc/stat (proc(5)) minus
// idle and iowait; −1 elsewhere.
double machine_busy_ms() {
  std::FILE* f = std::fopen("/proc/stat", "r");
  if (!f) return -1;
  unsigned long long v[8] = {};
  const int n = std::fscanf(f, "cpu %llu %llu %llu %llu %llu %llu %llu %llu", &v[0], &v[1], &v[2], &v[3], &v[4],
                            &v[5], &v[6], &v[7]);
  std::fclose(f);
  if (n != 8) return -1;
  const unsigned long long busy = v[0] + v[1] + v[2] + v[5] + v[6] + v[7];
  return double(busy) * 1e3 / double(sysconf(_SC_CLK_TCK));
}
}  // namespace

OtherLoad::OtherLoad() : busy0_(machine_busy_ms()), cpu0_(process_cpu_ms()), wall0_(now_ms()) {}

double OtherLoad::fraction() const {
  const double busy = machine_busy_ms() - busy0_, mine = process_cpu_ms() - cpu0_, wall = now_ms() - wall0_;
  if (busy0_ < 0 || wall <= 0) return -1;
  // /proc/stat counts in 10 ms ticks: over a window of a few ms the difference can pass
  // the whole machine, so the fraction is clamped to what it can mean.
  return std::clamp((busy - mine) / (wall * double(sysconf(_SC_NPROCESSORS_ONLN))), 0.0, 1.0);
}

std::vector<int> parse_thread_list(const std::string& s) {
  std::vector<int> out;
  std::stringstream ss(s);
  for (std::string t; std::getline(ss, t, ',');) {
    std::size_t used = 0;
    int n = 0;
    try {
      n = std::stoi(t, &used);
    } catch (const std::exception&) {
      used = 0;
    }
    if (used == 0 || used != t.size() || n < 1 || n > 1024)
      throw Error("--threads '" + s + "': expected a comma-separated list of positive counts, e.g. 1,2");
    out.push_back(n);
  }
  if (out.empty()) throw Error("--threads '" + s + "': expected at least one count, e.g. 1,2");
  return out;
}

}  // namespace tessera::bench
