// atomic_file.h — write a file so that readers see either the old file or the whole new one.
// Usage: AtomicFile f(path); f.write(bytes, n); ...; f.commit();
// Data goes to "<path>.tmp-<pid>" in the same folder; commit() flushes, fsyncs and renames
// it over <path>. If the object dies without commit() (an error, an exception) the
// temporary file is removed and <path> is untouched.
#pragma once
#include <cstddef>
#include <cstdio>
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

}  // namespace tessera
