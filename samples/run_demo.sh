#!/usr/bin/env bash
# README command 1: install what is needed, build, and run the whole demo:
#   1. synthesise the demo corpus (announcements of the fictional Tarrow Sound Ferries,
#      espeak-ng, 8 voices; held-out sentences never trained on)          demo/corpus/
#   2. train configs/demo.yaml (4 stages x 256 codes, 800 bit/s)          demo/model/
#   3. tokenize the held-out set                                          demo/tokens/
#   4. rate-distortion table over the held-out set                        demo/evaluation.{json,csv}
#   5. a depth ladder of the typical held-out file (median full-depth MCD) demo/ladder/
#   6. the listening page for four held-out files (10th, 50th, 75th and
#      95th percentile of full-depth MCD: good, typical, worse, near-worst) demo/report/index.html
# Reruns reuse what exists; `--retrain` trains again from scratch.
# Usage: bash samples/run_demo.sh [--retrain]      (from the project root; writes into demo/)
set -euo pipefail
cd "$(dirname "$0")/.."
retrain=0
[ "${1:-}" = "--retrain" ] && retrain=1
start=$(date +%s)
bash .ci/install-deps --demo
cmake -S . -B build -DCMAKE_BUILD_TYPE=Release -DTESSERA_NATIVE=ON -DTESSERA_TESTS=OFF >/dev/null
cmake --build build -j"$(nproc)" --target tessera
t=build/tessera
mkdir -p demo

echo "== 1/6 demo corpus"
/usr/bin/python3 samples/make_demo_corpus.py demo/corpus
echo "== 2/6 training configs/demo.yaml (a few minutes; Ctrl-C checkpoints, a rerun resumes)"
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
echo "== 3/6 tokenizing the held-out set"
"$t" encode --model "$model" demo/corpus/heldout --out demo/tokens --flat demo/tokens/flat.txt
echo "== 4/6 rate-distortion over the held-out set"
"$t" evaluate --model "$model" demo/corpus/heldout --json --csv demo/evaluation.csv >demo/evaluation.json
# The files to show are chosen by a rule, not by hand: percentiles of full-depth audio MCD.
mapfile -t picks < <(/usr/bin/python3 - <<'PY'
import csv
rows = list(csv.DictReader(open("demo/evaluation.csv")))
full = max(int(r["depth"]) for r in rows if r["depth"] != "oracle")
by_mcd = sorted((float(r["mcd_db"]), r["source"]) for r in rows if r["depth"] == str(full))
for q in (0.50, 0.10, 0.75, 0.95):
    print(by_mcd[round(q * (len(by_mcd) - 1))][1])
PY
)
echo "== 5/6 depth ladder of the typical held-out file (median full-depth MCD): ${picks[0]}"
"$t" ladder --model "$model" "${picks[0]}" -o demo/ladder >/dev/null
echo "== 6/6 listening page (held-out files at the 10th, 50th, 75th and 95th percentile of MCD)"
"$t" report --model "$model" "${picks[1]}" "${picks[0]}" "${picks[2]}" "${picks[3]}" -o demo/report >demo/report.log
echo
echo "== done in $(( $(date +%s) - start )) s"
/usr/bin/python3 - <<'PY'
import json
e = json.load(open("demo/evaluation.json"))
print(f"held-out set: {e['files']} files, {e['audio_s'] / 60:.1f} min, sentences never trained on (means):")
print("| depth | kbps | feature log-mel L1 | audio MCD dB |")
print("|---|---|---|---|")
for d in e["depths"]:
    print(f"| {d['depth']} | {d['kbps']:.3f} | {d['feature_mel_l1']:.3f} | {d['mcd_db']:.2f} |")
print(f"| oracle | - | - | {e['oracle']['mcd_db']:.2f} |")
j = json.load(open("demo/ladder/ladder.json"))
o, ds = j["oracle"], j["depths"]
print()
print(f"ladder of {j['source']} ({j['duration_s']:.2f} s), model {j['model_id']}:")
print("| depth | kbps | feature log-mel L1 | feature MCD dB | audio MCD dB |")
print("|---|---|---|---|---|")
for d in ds:
    print(f"| {d['depth']} | {d['kbps']:.3f} | {d['feature_mel_l1']:.3f} | {d['feature_mcd_db']:.2f} | {d['mcd_db']:.2f} |")
print(f"| oracle | - | - | - | {o['mcd_db']:.2f} |")
falls = all(b["mcd_db"] < a["mcd_db"] for a, b in zip(ds, ds[1:]))
print(f"audio MCD falls with every stage: {'yes' if falls else 'NO'}; "
      f"full depth: log-mel L1 {ds[-1]['feature_mel_l1']:.3f}, "
      f"audio MCD {ds[-1]['mcd_db'] - o['mcd_db']:.1f} dB above the oracle")
PY
echo
echo "made:"
echo "  demo/corpus/          the demo corpus (train/ and heldout/, corpus.jsonl)"
echo "  demo/model/           model.safetensors, metrics.jsonl, config.yaml"
echo "  demo/tokens/          held-out tokens (.npy per file, manifest.jsonl, flat.txt)"
echo "  demo/evaluation.json  the held-out table above (per file: demo/evaluation.csv)"
echo "  demo/ladder/          original.wav, oracle.wav, depth-1..4.wav, ladder.json"
echo "  listening page:       $(pwd)/demo/report/index.html"
echo "Listen at a moderate level (files are peak-limited to -1 dBFS). The voices are synthetic;"
echo "with your own recordings, remember that tokens decode back to a recognisable voice."
