// append_file.cpp — whole-line appends with roll-back on a short write (see append_file.h).
#include "audio/append_file.h"

#include <cerrno>
#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include "audio/error.h"

namespace tessera {

AppendFile::AppendFile(std::string path) : path_(std::move(path)) {
  fd_ = ::open(path_.c_str(), O_WRONLY | O_APPEND | O_CREAT | O_CLOEXEC, 0666);
  if (fd_ < 0) throw Error("cannot write '" + path_ + "': " + system_message(errno));
}

AppendFile::~AppendFile() {
  if (fd_ >= 0) ::close(fd_);
}

void AppendFile::append_line(const std::string& line) {
  struct stat st {};
  if (::fstat(fd_, &st) != 0) throw Error("cannot write '" + path_ + "': " + system_message(errno));
  const std::string text = line + "\n";
  std::size_t done = 0;
  while (done < text.size()) {
    const ssize_t n = ::write(fd_, text.data() + done, text.size() - done);
    if (n > 0) { done += std::size_t(n); continue; }
    if (n < 0 && errno == EINTR) continue;
    const int err = n == 0 ? ENOSPC : errno;
    // Roll back the part that went through; the file keeps only whole lines.
    if (done > 0 && ::ftruncate(fd_, st.st_size) != 0) {}
    throw Error("cannot write '" + path_ + "': " + system_message(err));
  }
}

void append_line_to_file(const std::string& path, const std::string& line) {
  AppendFile f(path);
  f.append_line(line);
}

}  // namespace tessera
