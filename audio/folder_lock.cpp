// folder_lock.cpp — flock(2) on FOLDER/.tessera.lock; see folder_lock.h.
#include "audio/folder_lock.h"

#include <cerrno>
#include <cstring>
#include <ctime>
#include <filesystem>
#include <fcntl.h>
#include <sys/file.h>
#include <sys/stat.h>
#include <unistd.h>

#include "audio/error.h"

namespace tessera {
namespace fs = std::filesystem;
namespace {

std::string read_all(int fd) {
  std::string text;
  char buf[512];
  ::lseek(fd, 0, SEEK_SET);
  for (ssize_t n; (n = ::read(fd, buf, sizeof buf)) > 0;) text.append(buf, std::size_t(n));
  return text;
}

// "train 123 host 2026-01-01 10:00:00 UTC" → "tessera train, pid 123 on host host, started ...".
std::string describe(const std::string& text) {
  char command[64] = "", host[256] = "";
  long pid = 0;
  int used = 0;
  if (std::sscanf(text.c_str(), "%63s %ld %255s %n", command, &pid, host, &used) < 3)
    return "a lock file of unknown content";
  std::string since = text.substr(std::size_t(used));
  while (!since.empty() && (since.back() == '\n' || since.back() == ' ')) since.pop_back();
  return std::string("tessera ") + command + ", pid " + std::to_string(pid) + " on host " + host +
         (since.empty() ? "" : ", started " + since);
}

std::string this_process(const std::string& command) {
  char host[256] = "?";
  ::gethostname(host, sizeof host - 1);
  const std::time_t now = std::time(nullptr);
  char when[64];
  std::strftime(when, sizeof when, "%Y-%m-%d %H:%M:%S UTC", std::gmtime(&now));
  return command + " " + std::to_string(::getpid()) + " " + host + " " + when + "\n";
}

}  // namespace

FolderLock::FolderLock(const std::string& folder, const std::string& command, const std::string& name)
    : folder_(folder), path_((fs::path(folder) / name).string()) {
  std::error_code ec;
  if (!fs::is_directory(folder, ec)) {
    created_folder_ = fs::create_directories(folder, ec);
    if (ec) throw Error("cannot create '" + folder + "': " + ec.message());
  }
  // The holder unlinks the file before it lets go, so a lock won on an unlinked file
  // (the path now names another inode, or none) is retried on the current one.
  for (;;) {
    fd_ = ::open(path_.c_str(), O_RDWR | O_CREAT | O_CLOEXEC, 0644);
    if (fd_ < 0) throw Error("cannot create the lock file '" + path_ + "': " + std::strerror(errno));
    if (::flock(fd_, LOCK_EX | LOCK_NB) != 0) {
      const int err = errno;
      const std::string holder = read_all(fd_);
      ::close(fd_);
      fd_ = -1;
      if (err == EWOULDBLOCK)
        throw Error("'" + folder + "' is in use by " + describe(holder) + " (lock file '" + path_ +
                    "'); wait until it ends or choose another output folder");
      throw Error("cannot lock '" + path_ + "': " + std::strerror(err));
    }
    struct stat held {}, now {};
    if (::fstat(fd_, &held) == 0 && ::stat(path_.c_str(), &now) == 0 && held.st_ino == now.st_ino &&
        held.st_dev == now.st_dev)
      break;
    ::close(fd_);
  }
  const std::string before = read_all(fd_);
  if (!before.empty()) previous_ = describe(before);
  const std::string me = this_process(command);
  if (::ftruncate(fd_, 0) != 0 || ::pwrite(fd_, me.data(), me.size(), 0) != ssize_t(me.size())) {
    const int err = errno;
    ::unlink(path_.c_str());
    ::close(fd_);
    throw Error("cannot write the lock file '" + path_ + "': " + std::strerror(err));
  }
}

FolderLock::~FolderLock() {
  ::unlink(path_.c_str());
  ::close(fd_);
  if (created_folder_) ::rmdir(folder_.c_str());   // fails harmlessly unless empty
}

}  // namespace tessera
