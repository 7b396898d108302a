// atomic_file.cpp — temporary file + fsync + rename.
#include "audio/atomic_file.h"

#include <cerrno>
#include <csignal>
#include <cstring>
#include <filesystem>
#include <fcntl.h>
#include <unistd.h>

#include "audio/error.h"

namespace tessera {

AtomicFile::AtomicFile(std::string path) : path_(std::move(path)) {
  temp_ = path_ + ".tmp-" + std::to_string(::getpid());
  f_ = std::fopen(temp_.c_str(), "wb");
  if (!f_) throw Error("cannot write '" + path_ + "': " + system_message(errno));
}

AtomicFile::~AtomicFile() {
  if (f_) std::fclose(f_);
  if (!committed_) std::remove(temp_.c_str());
}

void AtomicFile::write(const void* data, std::size_t n) {
  if (n == 0) return;
  if (std::fwrite(data, 1, n, f_) != n)
    throw Error("cannot write '" + path_ + "': " + system_message(errno));
}

int AtomicFile::fd() const { return ::fileno(f_); }

void AtomicFile::commit() {
  if (std::fflush(f_) != 0 || ::fsync(::fileno(f_)) != 0)
    throw Error("cannot write '" + path_ + "': " + system_message(errno));
  if (std::fclose(f_) != 0) {
    f_ = nullptr;
    throw Error("cannot write '" + path_ + "': " + system_message(errno));
  }
  f_ = nullptr;
  if (std::rename(temp_.c_str(), path_.c_str()) != 0)
    throw Error("cannot rename '" + temp_ + "' to '" + path_ + "': " + system_message(errno));
  committed_ = true;
  // The rename is an entry in the folder: it is durable once the folder is synced.
  // Some file systems cannot fsync a folder (EINVAL); the data itself is safe then too.
  const std::string folder = std::filesystem::path(path_).parent_path().string();
  const int dir = ::open(folder.empty() ? "." : folder.c_str(), O_RDONLY | O_DIRECTORY | O_CLOEXEC);
  if (dir >= 0) {
    const int rc = ::fsync(dir), err = errno;
    ::close(dir);
    if (rc != 0 && err != EINVAL) throw Error("cannot write '" + path_ + "': " + std::strerror(err));
  }
}

void write_file_atomic(const std::string& path, const std::string& contents) {
  AtomicFile f(path);
  f.write(contents);
  f.commit();
}

int remove_stale_temporaries(const std::string& folder, const std::function<bool(const std::string&)>& mine) {
  namespace fs = std::filesystem;
  int removed = 0;
  std::error_code ec;
  for (const auto& entry : fs::directory_iterator(folder, ec)) {
    const std::string name = entry.path().filename().string();
    const auto at = name.rfind(".tmp-");
    if (at == std::string::npos || at == 0 || at + 5 == name.size()) continue;
    const std::string digits = name.substr(at + 5);
    if (digits.find_first_not_of("0123456789") != std::string::npos || digits.size() > 9) continue;
    const long pid = std::stol(digits);
    if (pid == ::getpid() || ::kill(pid_t(pid), 0) == 0 || errno != ESRCH) continue;
    if (mine && !mine((entry.path().parent_path() / name.substr(0, at)).string())) continue;
    std::error_code rm;
    removed += fs::remove(entry.path(), rm) ? 1 : 0;
  }
  return removed;
}

}  // namespace tessera
