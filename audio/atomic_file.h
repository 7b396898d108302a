// atomic_file.h — write a file so that readers see either the old file or the whole new one.
// Usage: AtomicFile f(path); f.write(bytes, n); ...; f.commit();
// Data goes to "<path>.tmp-<pid>" in the same folder; commit() flushes, fsyncs and renames
// it over <path>, then fsyncs the folder so that the rename itself survives a crash. If the object dies without commit() (an error, an exception) the
// temporary file is removed and <path> is untouched.
#pragma once
#include <cstddef>
#include <cstdio>
#include <functional>
#include <string>

namespace tessera {

class AtomicFile {
 public:
  explicit AtomicFile(std::string path);   // throws tessera::Error if the folder is not writable
  ~AtomicFile();
  AtomicFile(const AtomicFile&) = delete;
  AtomicFile& operator=(const AtomicFile&) = delete;

  void write(const void* data, std::size_t n);   // throws on a short write (disk full)
  void write(const std::string& s) { write(s.data(), s.size()); }
  void commit();                                 // flush, fsync, rename; throws on failure
  const std::string& temp_path() const { return temp_; }
  int fd() const;   // the temporary file's descriptor, for libraries that write by fd
  const std::string& path() const { return path_; }

 private:
  std::string path_, temp_;
  std::FILE* f_ = nullptr;
  bool committed_ = false;
};

// Whole-file helper: write `contents` to `path` atomically.
void write_file_atomic(const std::string& path, const std::string& contents);

// Removes the "<name>.tmp-<pid>" files that a killed writer left in `folder` (not below
// it) whose pid is no longer running on this host and, when `mine` is given, whose
// target folder/<name> it accepts; returns how many. Call it only while holding the
// folder's lock (folder_lock.h), as a writer on another host is invisible here.
int remove_stale_temporaries(const std::string& folder,
                             const std::function<bool(const std::string& target)>& mine = {});

}  // namespace tessera
