#!/usr/bin/env bash
# rate_distortion_quality.sh — train a small model on a small espeak-ng corpus of the demo
# scenario (samples/make_demo_corpus.py, held-out sentences never seen in training), then
# check through the real binary what every depth must show (medians over the held-out set):
#   - feature-domain distortion (decoded vs true log-mel: L1 and MCD) never rises with depth;
#   - audio-domain MCD never rises over the first four depths (then ≤ 0.25 dB allowed);
#   - the oracle (true log-mel → Griffin-Lim) beats every depth;
#   - re-encoding the decoded log-mel keeps ≥ 20 % of the stage-1 codes (chance is 1/K);
#   - nominal kbps = frame rate × depth × log2 K; entropy kbps never above it.
# Needs espeak-ng and /usr/bin/python3 with numpy and scipy (installed by .ci/install-deps).
# Usage: rate_distortion_quality.sh TESSERA_BINARY SOURCE_DIR
. "$(dirname "$0")/../cli_common.sh" "$@"
if ! command -v espeak-ng >/dev/null || ! /usr/bin/python3 -c "import numpy, scipy" 2>/dev/null; then
  echo "SKIP: needs espeak-ng and /usr/bin/python3 with numpy and scipy (bash .ci/install-deps)"
  exit 0
fi

# 30 sentences x 8 voices: 27 training sentences, 3 held out (every 10th) in all voices.
/usr/bin/python3 "$src/samples/make_demo_corpus.py" "$work/corpus" --limit 30 >/dev/null
"$bin" train --config "$src/configs/demo.yaml" --out "$work/run" --corpus "$work/corpus/train" \
  --set model.channels=32 --set model.latent_dim=32 --set codebooks.codes=64 \
  --set train.batch_size=8 --set train.segment_frames=160 --set train.steps=2000 --set train.learning_rate=2e-3 \
  --set train.validate_every=1000 --set train.validation_segments=16 --set train.checkpoint_every=100000 \
  --set audio.griffin_lim_iters=32 >"$work/train.log" || { cat "$work/train.log"; fail "training failed"; }
"$bin" evaluate --model "$work/run/model.safetensors" "$work/corpus/heldout" --json >"$work/eval.json"
/usr/bin/python3 - "$work/eval.json" <<'PY' || fail "the rate-distortion curve breaks a rule above"
import json, math, sys
j = json.load(open(sys.argv[1]))
med, oracle = j["median"], j["oracle_median"]
K, rate = j["codebook_size"], j["frame_rate"]
print(f"held-out files: {j['files']}, {j['audio_s']:.1f} s of audio")
print("depth  kbps   feature L1  feature MCD  audio MCD")
for d in med:
    print(f"{d['depth']:>5}  {d['kbps']:.3f}  {d['feature_mel_l1']:.3f}       {d['feature_mcd_db']:6.2f}       {d['mcd_db']:6.2f}")
print(f"oracle audio MCD {oracle['mcd_db']:.2f} dB, L1 {oracle['mel_l1']:.3f}")
kept = [s["reencode_agreement"] for s in j["stages"]]
print("re-encode kept per stage: " + " ".join(f"{100 * k:.1f}%" for k in kept) + f" (chance {100 / K:.1f}%)")
bad = []
for a, b in zip(med, med[1:]):
    for key in ("feature_mel_l1", "feature_mcd_db"):
        if b[key] > a[key]:
            bad.append(f"{key} rises from depth {a['depth']} to {b['depth']}: {a[key]:.4f} -> {b[key]:.4f}")
    allowed = 0.0 if b["depth"] <= 4 else 0.25
    if b["mcd_db"] > a["mcd_db"] + allowed:
        bad.append(f"audio MCD rises from depth {a['depth']} to {b['depth']}: {a['mcd_db']:.2f} -> {b['mcd_db']:.2f} dB")
for d in med:
    if not (oracle["mcd_db"] < d["mcd_db"] and oracle["mel_l1"] < d["mel_l1"]):
        bad.append(f"oracle not better than depth {d['depth']}")
for d in j["depths"]:
    if abs(d["kbps"] - rate * d["depth"] * math.log2(K) / 1000) > 1e-9:
        bad.append(f"nominal kbps at depth {d['depth']}: {d['kbps']}")
    if d["entropy_kbps"] > d["kbps"] + 1e-9:
        bad.append(f"entropy kbps above nominal at depth {d['depth']}")
if kept[0] < 0.20:
    bad.append(f"re-encoding keeps only {100 * kept[0]:.1f}% of stage-1 codes (need >= 20%)")
for b in bad:
    print("FAIL:", b)
sys.exit(1 if bad else 0)
PY
echo "rate-distortion checks passed"
