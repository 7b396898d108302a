// atomic_file.cpp — temporary file + fsync + rename.
#include "audio/atomic_file.h"

#include <cerrno>
#include <cstring>
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
}

void write_file_atomic(const std::string& path, const std::string& contents) {
  AtomicFile f(path);
  f.write(contents);
  f.commit();
}

}  // namespace tessera
