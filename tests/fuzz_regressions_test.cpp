// fuzz_regressions_test.cpp — every saved input under tests/fuzz/regressions/<target>/ (inputs
// that once crashed a parser, or broke its contract, found by the fuzz targets) and the
// committed format fixtures go through the same checks as the fuzz targets
// (tests/fuzz/fuzz_checks.h), so the fixed bugs stay fixed in the ordinary and sanitizer
// suites too, not only in the fuzz smoke run.
#include <doctest/doctest.h>

#include <filesystem>
#include <fstream>
#include <iterator>
#include <string>

#include "tests/fuzz/fuzz_checks.h"

namespace fs = std::filesystem;

namespace {

std::string slurp(const fs::path& p) {
  std::ifstream in(p, std::ios::binary);
  return {std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>()};
}

// Runs `check` on every file in `dir`; returns how many.
int replay(const fs::path& dir, void (*check)(std::string_view), const std::string& extension = "") {
  int n = 0;
  if (!fs::is_directory(dir)) return 0;
  for (const auto& e : fs::directory_iterator(dir)) {
    if (!e.is_regular_file() || (!extension.empty() && e.path().extension() != extension)) continue;
    INFO("input: " << e.path().string());
    const std::string bytes = slurp(e.path());
    CHECK_NOTHROW(check(bytes));   // a check returns on accepted and on refused input
    ++n;
  }
  return n;
}

}  // namespace

TEST_CASE("saved fuzz inputs are accepted or refused with tessera::Error, never crash") {
  const fs::path root = fs::path(TESSERA_SOURCE_DIR) / "tests/fuzz/regressions";
  int total = 0;
  for (const auto& t : tessera::fuzz::kTargets) {
    CAPTURE(t.name);
    total += replay(root / t.name, t.check);
  }
  MESSAGE(total << " saved fuzz inputs replayed");
}

TEST_CASE("format fixtures, good and damaged, pass the fuzz contracts") {
  const fs::path formats = fs::path(TESSERA_FIXTURES) / "formats";
  CHECK(replay(formats, tessera::fuzz::check_npy, ".npy") > 5);
  CHECK(replay(formats, tessera::fuzz::check_safetensors, ".safetensors") > 10);
  CHECK(replay(formats, tessera::fuzz::check_model, ".safetensors") > 10);
  CHECK(replay(fs::path(TESSERA_SOURCE_DIR) / "configs", tessera::fuzz::check_config, ".yaml") >= 4);
  CHECK(replay(fs::path(TESSERA_SOURCE_DIR) / "samples", tessera::fuzz::check_audio, ".wav") >= 4);
}
