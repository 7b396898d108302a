// manifest_fuzz.cpp — libFuzzer target: tessera::fuzz::check_manifest (tests/fuzz/fuzz_checks.h).
#include "tests/fuzz/fuzz_checks.h"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  tessera::fuzz::check_manifest(tessera::fuzz::as_bytes(data, size));
  return 0;
}
