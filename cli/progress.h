// progress.h — one self-updating status line on stderr (rate and ETA) for long work.
// On a terminal it redraws at most 10 times a second; otherwise it stays silent until
// finish(), so logs are not flooded.
#pragma once
#include <chrono>
#include <string>

namespace tessera::cli {

class Progress {
 public:
  // `total` units of work; `unit` names them in the rate ("it/s", "files/s").
  Progress(std::string label, double total, std::string unit);
  void update(double done, const std::string& extra = "");
  void finish(const std::string& extra = "");
  // Prints one line above the status line ("warning: ...", "skipped ..."), clearing what
  // the status line showed; the next update() redraws it below.
  void message(const std::string& line);
  double elapsed() const;

 private:
  void draw(double done, const std::string& extra, bool final);
  std::string label_, unit_;
  double total_;
  bool tty_;
  std::chrono::steady_clock::time_point start_, last_draw_;
};

std::string format_duration(double seconds);  // "1:23", "1:02:03"

}  // namespace tessera::cli
