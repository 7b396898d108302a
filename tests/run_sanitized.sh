#!/usr/bin/env bash
# The whole test suite under AddressSanitizer + UndefinedBehaviorSanitizer (gcc), built in
# build-asan/ with -DTESSERA_SANITIZE=ON. Any sanitizer report aborts the test that caused it.
# Usage: bash tests/run_sanitized.sh        (from the project root; CI runs it from .ci/run)
set -euo pipefail
cd "$(dirname "$0")/.."
launcher=()
command -v ccache >/dev/null && launcher=(-DCMAKE_CXX_COMPILER_LAUNCHER=ccache)
cmake -S . -B build-asan -DCMAKE_BUILD_TYPE=Release -DTESSERA_NATIVE=OFF -DTESSERA_SANITIZE=ON \
  -DTESSERA_BENCH=OFF "${launcher[@]}" >/dev/null
cmake --build build-asan -j"$(nproc)"
export UBSAN_OPTIONS=print_stacktrace=1:halt_on_error=1${UBSAN_OPTIONS:+:$UBSAN_OPTIONS}
export ASAN_OPTIONS=strict_string_checks=1:detect_stack_use_after_return=1${ASAN_OPTIONS:+:$ASAN_OPTIONS}
ctest --test-dir build-asan --output-on-failure -j"$(nproc)"
