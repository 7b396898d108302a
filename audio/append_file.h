// append_file.h — append whole lines to a log-like file (manifest.jsonl, metrics.jsonl) so
// that a failed write (disk full) leaves the file as it was: never half a line.
// Usage: AppendFile log(path); log.append_line(json);   // throws tessera::Error naming path
#pragma once
#include <string>

namespace tessera {

class AppendFile {
 public:
  explicit AppendFile(std::string path);   // creates the file if missing; throws if it cannot
  ~AppendFile();
  AppendFile(const AppendFile&) = delete;
  AppendFile& operator=(const AppendFile&) = delete;

  // Writes `line` and a newline. On any failure the file is cut back to its length before
  // the call, then tessera::Error ("cannot write 'path': no space left on device") is thrown.
  void append_line(const std::string& line);
  const std::string& path() const { return path_; }

 private:
  std::string path_;
  int fd_ = -1;
};

// One-shot form: opens, appends one line, closes.
void append_line_to_file(const std::string& path, const std::string& line);

}  // namespace tessera
