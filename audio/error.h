// error.h — the error type for everything a user can cause (bad files, bad configs).
// Messages are lowercase and name the bad value: "cannot open audio file 'x.wav': ...".
// Only the CLI's main() catches, prints "error: <message>" and exits non-zero.
#pragma once
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

}  // namespace tessera
