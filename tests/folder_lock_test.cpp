// folder_lock_test.cpp — one writer per output folder, takeover of a dead holder's lock,
// and removal of the temporary files a killed writer left.
#include <doctest/doctest.h>

#include <filesystem>
#include <fstream>
#include <sys/wait.h>
#include <unistd.h>

#include "audio/atomic_file.h"
#include "audio/error.h"
#include "audio/folder_lock.h"

using namespace tessera;
namespace fs = std::filesystem;

namespace {

fs::path scratch(const std::string& name) {
  fs::path d = fs::temp_directory_path() / ("tessera-lock-test-" + std::to_string(::getpid())) / name;
  fs::remove_all(d);
  return d;
}

// The pid of a process that has ended (a child that exits at once and is reaped).
pid_t dead_pid() {
  const pid_t child = ::fork();
  if (child == 0) ::_exit(0);
  ::waitpid(child, nullptr, 0);
  return child;
}

}  // namespace

TEST_CASE("a second lock on a folder is refused, naming the holder") {
  const fs::path dir = scratch("second");
  {
    FolderLock first(dir.string(), "train");
    CHECK(first.takeover().empty());
    CHECK(fs::exists(dir / ".tessera.lock"));
    // flock(2) locks belong to the open file, so a second open in this process conflicts too.
    const std::string holder = "is in use by tessera train, pid " + std::to_string(::getpid());
    CHECK_THROWS_WITH_AS(FolderLock(dir.string(), "encode"), doctest::Contains(holder.c_str()), Error);
    // Another lock name in the same folder (another shard's) is independent.
    FolderLock shard(dir.string(), "encode", ".tessera.shard-1-of-2.lock");
  }
  CHECK_FALSE(fs::exists(dir));   // made by the lock, empty, so removed with it
}

TEST_CASE("the lock file of a dead process is taken over") {
  const fs::path dir = scratch("stale");
  fs::create_directories(dir);
  const pid_t gone = dead_pid();
  std::ofstream(dir / ".tessera.lock") << "train " << gone << " otherhost 2026-01-01 10:00:00 UTC\n";
  {
    FolderLock lock(dir.string(), "train");
    CHECK(lock.takeover() == "tessera train, pid " + std::to_string(gone) +
                                 " on host otherhost, started 2026-01-01 10:00:00 UTC");
    std::ifstream in(dir / ".tessera.lock");
    std::string command, pid;
    in >> command >> pid;
    CHECK(command == "train");
    CHECK(pid == std::to_string(::getpid()));
  }
  CHECK(fs::exists(dir));   // existed before: kept
  CHECK_FALSE(fs::exists(dir / ".tessera.lock"));
  fs::remove_all(dir.parent_path());
}

TEST_CASE("temporary files of dead writers are removed, those of live ones kept") {
  const fs::path dir = scratch("temps");
  fs::create_directories(dir);
  const std::string gone = std::to_string(dead_pid()), me = std::to_string(::getpid());
  for (const std::string& name : std::vector<std::string>{"model.safetensors.tmp-" + gone, "a.npy.tmp-" + gone, "b.npy.tmp-" + me,
                                 "c.tmp-x1", "model.safetensors"})
    std::ofstream(dir / name) << "x";
  // Only a.npy's temporary is "mine" here; then every dead one.
  CHECK(remove_stale_temporaries(dir.string(), [&](const std::string& t) { return t == (dir / "a.npy").string(); }) == 1);
  CHECK_FALSE(fs::exists(dir / ("a.npy.tmp-" + gone)));
  CHECK(remove_stale_temporaries(dir.string()) == 1);
  CHECK_FALSE(fs::exists(dir / ("model.safetensors.tmp-" + gone)));
  CHECK(fs::exists(dir / ("b.npy.tmp-" + me)));
  CHECK(fs::exists(dir / "c.tmp-x1"));
  CHECK(fs::exists(dir / "model.safetensors"));
  fs::remove_all(dir.parent_path());
}
