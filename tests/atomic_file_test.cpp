// atomic_file_test.cpp — AtomicFile and AppendFile when the disk refuses a write. A file
// size limit (setrlimit RLIMIT_FSIZE, POSIX; writes past it fail with EFBIG once SIGXFSZ
// is ignored) stands in for a full disk without needing root; tests/cli/full_disk.sh does
// the real thing on a tmpfs.
#include <doctest/doctest.h>

#include <csignal>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>
#include <sys/resource.h>
#include <unistd.h>

#include "audio/append_file.h"
#include "audio/atomic_file.h"
#include "audio/error.h"

using namespace tessera;
namespace fs = std::filesystem;

namespace {

// Limits the size of any file this process writes, for the guard's lifetime.
struct FileSizeLimit {
  rlimit old{};
  explicit FileSizeLimit(rlim_t bytes) {
    std::signal(SIGXFSZ, SIG_IGN);
    getrlimit(RLIMIT_FSIZE, &old);
    rlimit now = old;
    now.rlim_cur = bytes;
    setrlimit(RLIMIT_FSIZE, &now);
  }
  ~FileSizeLimit() { setrlimit(RLIMIT_FSIZE, &old); }
};

std::string slurp(const fs::path& p) {
  std::ifstream in(p, std::ios::binary);
  std::stringstream s;
  s << in.rdbuf();
  return s.str();
}

fs::path scratch_dir() {
  fs::path d = fs::temp_directory_path() / ("tessera-atomic-test-" + std::to_string(::getpid()));
  fs::remove_all(d);
  fs::create_directories(d);
  return d;
}

}  // namespace

TEST_CASE("a refused write leaves the old file whole and no temporary file") {
  const fs::path dir = scratch_dir();
  const std::string path = (dir / "out.bin").string();
  write_file_atomic(path, "the earlier result\n");
  const std::string big(1 << 20, 'x');
  std::string message;
  {
    FileSizeLimit limit(64 * 1024);
    try {
      AtomicFile f(path);
      f.write(big);
      f.commit();
    } catch (const Error& e) {
      message = e.what();
    }
  }
  CHECK(message.find("cannot write '" + path + "'") != std::string::npos);
  CHECK(message.find("file too large") != std::string::npos);   // strerror(EFBIG), lowercased
  CHECK(slurp(path) == "the earlier result\n");
  int entries = 0;
  for ([[maybe_unused]] const auto& e : fs::directory_iterator(dir)) ++entries;
  CHECK(entries == 1);
  fs::remove_all(dir);
}

TEST_CASE("an append that does not fit is rolled back: whole lines only") {
  const fs::path dir = scratch_dir();
  const std::string path = (dir / "log.jsonl").string();
  AppendFile log(path);
  log.append_line("{\"a\":1}");
  {
    FileSizeLimit limit(8 + 20);   // the first line (8 bytes) and 20 more
    std::string message;
    try {
      log.append_line(std::string(100, 'y'));
    } catch (const Error& e) {
      message = e.what();
    }
    CHECK(message == "cannot write '" + path + "': file too large");
    CHECK(slurp(path) == "{\"a\":1}\n");
    log.append_line("{\"b\":2}");   // a line that fits still goes in
  }
  CHECK(slurp(path) == "{\"a\":1}\n{\"b\":2}\n");
  fs::remove_all(dir);
}
