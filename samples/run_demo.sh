#!/usr/bin/env bash
# README command 1: install what is needed, build, and run the demo.
# Today the demo synthesises one announcement of our fictional ferry service with
# espeak-ng and resynthesises it through the pipeline's ceiling (log-mel -> Griffin-Lim).
# Usage: bash samples/run_demo.sh      (from the project root; writes into demo/)
set -euo pipefail
cd "$(dirname "$0")/.."
bash .ci/install-deps
cmake -S . -B build -DCMAKE_BUILD_TYPE=Release -DTESSERA_NATIVE=ON >/dev/null
cmake --build build -j"$(nproc)" --target tessera
mkdir -p demo
text="The ten forty ferry to Gannet Holm will leave from pier three. Please have your tickets ready."
[ -f demo/announcement.wav ] || espeak-ng -v en-gb -s 160 -w demo/announcement.wav "$text"
./build/tessera resynth demo/announcement.wav -o demo/announcement-resynth.wav
echo
echo "made: demo/announcement.wav (espeak-ng, 22.05 kHz) and demo/announcement-resynth.wav (16 kHz)"
echo "listen at a moderate level; output is peak-limited to -1 dBFS."
