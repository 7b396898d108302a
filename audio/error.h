// error.h — the error type for everything a user can cause (bad files, bad configs).
// Messages are lowercase and name the bad value: "cannot open audio file 'x.wav': ...".
// Only the CLI's main() catches, prints "error: <message>" and exits non-zero.
#pragma once
#include <cstring>
#include <stdexcept>
#include <string>

namespace tessera {

struct Error : std::runtime_error {
  using std::runtime_error::runtime_error;
};

// `message` with `path` in front unless it already names it: batch commands use this so
// that every per-file error says which file.
inline std::string naming_file(const std::string& path, const std::string& message) {
  return message.find(path) == std::string::npos ? path + ": " + message : message;
}

// A library's message in the house style: first letter lowercase unless the first word is
// an acronym ("WAV ..."), no final full stop. "Format not recognised." -> "format not recognised"
inline std::string house_style(std::string m) {
  if (!m.empty() && m[0] >= 'A' && m[0] <= 'Z' && !(m.size() > 1 && m[1] >= 'A' && m[1] <= 'Z')) m[0] = char(m[0] - 'A' + 'a');
  while (!m.empty() && (m.back() == '.' || m.back() == '\n')) m.pop_back();
  return m;
}

// strerror(err) in the house style: "no space left on device".
inline std::string system_message(int err) { return house_style(std::strerror(err)); }

}  // namespace tessera
