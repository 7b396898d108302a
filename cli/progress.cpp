// progress.cpp — status line drawing.
#include "cli/progress.h"

#include <cmath>
#include <cstdio>
#include <unistd.h>

namespace tessera::cli {

std::string format_duration(double s) {
  if (!std::isfinite(s) || s < 0) return "--:--";
  const long t = long(s + 0.5);
  char buf[32];
  if (t >= 3600) std::snprintf(buf, sizeof buf, "%ld:%02ld:%02ld", t / 3600, t / 60 % 60, t % 60);
  else std::snprintf(buf, sizeof buf, "%ld:%02ld", t / 60, t % 60);
  return buf;
}

Progress::Progress(std::string label, double total, std::string unit)
    : label_(std::move(label)), unit_(std::move(unit)), total_(total), tty_(::isatty(2) != 0),
      start_(std::chrono::steady_clock::now()), last_draw_(start_ - std::chrono::seconds(1)) {}

double Progress::elapsed() const {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - start_).count();
}

void Progress::update(double done, const std::string& extra) {
  if (!tty_) return;
  const auto now = std::chrono::steady_clock::now();
  if (now - last_draw_ < std::chrono::milliseconds(100)) return;
  last_draw_ = now;
  draw(done, extra, false);
}

void Progress::finish(const std::string& extra) { draw(total_, extra, true); }

void Progress::message(const std::string& line) {
  std::fprintf(stderr, "%s%s\n", tty_ ? "\r\033[K" : "", line.c_str());
  last_draw_ = start_ - std::chrono::seconds(1);  // redraw at the next update
  std::fflush(stderr);
}

void Progress::draw(double done, const std::string& extra, bool final) {
  const double t = elapsed();
  const double rate = t > 0 ? done / t : 0;
  const double eta = rate > 0 ? (total_ - done) / rate : NAN;
  const int width = 24;
  const double frac = total_ > 0 ? std::min(1.0, done / total_) : 1.0;
  std::string bar(std::size_t(frac * width + 0.5), '#');
  bar.resize(width, '.');
  std::fprintf(stderr, "%s%s [%s] %3.0f%%  %.1f %s  %s %s  %s%s", tty_ ? "\r\033[K" : "",
               label_.c_str(), bar.c_str(), 100 * frac, rate, unit_.c_str(),
               final ? "took" : "eta", format_duration(final ? t : eta).c_str(), extra.c_str(),
               final ? "\n" : "");
  std::fflush(stderr);
}

}  // namespace tessera::cli
