// folder_lock.h — one writer per output folder: `tessera train`, `encode`, `ladder` and
// `report` hold FOLDER/<name> (".tessera.lock" by default) while they run.
//   FolderLock lock(out, "train");   // throws if another live process holds it
// The file holds "pid host command start-time" for the message a second writer gets. The
// lock itself is flock(2) on that file, so the kernel releases it when the holder dies,
// even by SIGKILL; a file left by a dead holder is taken over (takeover() says whose it was).
#pragma once
#include <string>

namespace tessera {

class FolderLock {
 public:
  // Creates `folder` if needed; throws tessera::Error naming the holder when another
  // process (on this or, over NFS, another host) holds the lock.
  FolderLock(const std::string& folder, const std::string& command, const std::string& name = ".tessera.lock");
  ~FolderLock();   // removes the lock file (and the folder, if this lock created it and it is empty)
  FolderLock(const FolderLock&) = delete;
  FolderLock& operator=(const FolderLock&) = delete;

  // Non-empty when a lock file left by a process that is no longer running was taken
  // over: "tessera train, pid 123 on host h, started 2026-01-01 10:00:00 UTC".
  const std::string& takeover() const { return previous_; }

 private:
  std::string folder_, path_, previous_;
  int fd_ = -1;
  bool created_folder_ = false;
};

}  // namespace tessera
