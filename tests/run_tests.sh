#!/usr/bin/env bash
# README command 2: install what is needed, build, and run the whole test suite.
# Usage: bash tests/run_tests.sh        (from the project root; exits non-zero on any failure)
set -euo pipefail
cd "$(dirname "$0")/.."
bash .ci/install-deps
# The portable build (no -march=native): its training runs are bit-reproducible, which the
# resume test checks; it lives in build-tests/ so the demo's native build/ stays as it is.
cmake -S . -B build-tests -DCMAKE_BUILD_TYPE=Release -DTESSERA_NATIVE=OFF >/dev/null
cmake --build build-tests -j"$(nproc)"
ctest --test-dir build-tests --output-on-failure -j"$(nproc)"
