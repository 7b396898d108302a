#!/usr/bin/env bash
# README command 1: install what is needed, build, and run the whole demo:
#   1. synthesise the demo corpus (announcements of the fictional Tarrow Sound Ferries,
#      espeak-ng, 8 voices; held-out sentences never trained on)          demo/corpus/
#   2. train configs/demo.yaml (4 stages x 256 codes, 800 bit/s)          demo/model/
#   3. tokenize the held-out set                                          demo/tokens/
#   4. a depth ladder of one held-out sentence                            demo/ladder/
#   5. the listening page for four held-out sentences                     demo/report/index.html
# Reruns reuse what exists; `--retrain` trains again from scratch.
# Usage: bash samples/run_demo.sh [--retrain]      (from the project root; writes into demo/)
set -euo pipefail
cd "$(dirname "$0")/.."
retrain=0
[ "${1:-}" = "--retrain" ] && retrain=1
start=$(date +%s)
bash .ci/install-deps
cmake -S . -B build -DCMAKE_BUILD_TYPE=Release -DTESSERA_NATIVE=ON -DTESSERA_TESTS=OFF >/dev/null
cmake --build build -j"$(nproc)" --target tessera
t=build/tessera
mkdir -p demo

echo "== 1/5 demo corpus"
/usr/bin/python3 samples/make_demo_corpus.py demo/corpus
echo "== 2/5 training configs/demo.yaml (a few minutes; Ctrl-C checkpoints, a rerun resumes)"
if [ $retrain -eq 1 ]; then rm -rf demo/model; fi
steps=$(awk '$1 == "steps:" {print $2}' configs/demo.yaml)
if [ -f demo/model/model.safetensors ] && "$t" inspect demo/model/model.safetensors | grep -q "trained *$steps steps"; then
  echo "reusing demo/model/model.safetensors ($steps steps; bash samples/run_demo.sh --retrain to train again)"
elif [ -f demo/model/train-state.safetensors ]; then
  "$t" train --config configs/demo.yaml --out demo/model --resume
else
  "$t" train --config configs/demo.yaml --out demo/model
fi
model=demo/model/model.safetensors
echo "== 3/5 tokenizing the held-out set"
"$t" encode --model "$model" demo/corpus/heldout --out demo/tokens --flat demo/tokens/flat.txt
echo "== 4/5 depth ladder of one held-out sentence"
sentence=demo/corpus/heldout/gb-m3/s010.wav
"$t" ladder --model "$model" "$sentence" -o demo/ladder >/dev/null
echo "== 5/5 listening page"
"$t" report --model "$model" demo/corpus/heldout/gb-m3/s010.wav demo/corpus/heldout/lancaster-f3/s020.wav \
  demo/corpus/heldout/caribbean-m5/s030.wav demo/corpus/heldout/gb-m3/s040.wav -o demo/report >demo/report.log
echo
echo "== done in $(( $(date +%s) - start )) s"
/usr/bin/python3 - <<'PY'
import json
j = json.load(open("demo/ladder/ladder.json"))
o = j["oracle"]
print(f"ladder of {j['source']} ({j['duration_s']:.2f} s), model {j['model_id']}:")
print("| depth | kbps | feature log-mel L1 | feature MCD dB | audio MCD dB |")
print("|---|---|---|---|---|")
for d in j["depths"]:
    print(f"| {d['depth']} | {d['kbps']:.3f} | {d['feature_mel_l1']:.3f} | {d['feature_mcd_db']:.2f} | {d['mcd_db']:.2f} |")
print(f"| oracle | - | - | - | {o['mcd_db']:.2f} |")
PY
echo
echo "made:"
echo "  demo/corpus/          the demo corpus (train/ and heldout/, corpus.jsonl)"
echo "  demo/model/           model.safetensors, metrics.jsonl, config.yaml"
echo "  demo/tokens/          held-out tokens (.npy per file, manifest.jsonl, flat.txt)"
echo "  demo/ladder/          original.wav, oracle.wav, depth-1..4.wav, ladder.json"
echo "  listening page:       $(pwd)/demo/report/index.html"
echo "Listen at a moderate level (files are peak-limited to -1 dBFS). The voices are synthetic;"
echo "with your own recordings, remember that tokens decode back to a recognisable voice."
