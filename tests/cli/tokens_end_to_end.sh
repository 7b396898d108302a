#!/usr/bin/env bash
# tokens_end_to_end.sh — train a tiny model on the committed sample WAVs through the real
# binary, then encode (resumable, sharded, flat), decode, ladder, evaluate and inspect, and
# check that bad token files are refused. Usage: tokens_end_to_end.sh TESSERA_BINARY SOURCE_DIR
. "$(dirname "$0")/../cli_common.sh" "$@"

mkdir -p "$work/corpus"
cp "$src"/samples/*.wav "$work/corpus/"
train_tiny_model "$bin" "$work/corpus" "$work/run" >"$work/train.log"
model=$work/run/model.safetensors
[ -f "$model" ] || fail "no model written"
"$bin" inspect "$model" | grep -q "3 stages x 16 codes" || fail "inspect does not show the codebooks"

"$bin" encode --model "$model" "$work/corpus" --out "$work/tok" --flat "$work/flat.txt" >/dev/null
n=$(find "$work/tok" -name '*.npy' | wc -l)
[ "$n" -eq 4 ] || fail "expected 4 token files, got $n"
[ "$(wc -l <"$work/tok/manifest.jsonl")" -eq 4 ] || fail "manifest should have 4 lines"
[ "$(wc -l <"$work/flat.txt")" -eq 4 ] || fail "flat file should have 4 lines"
# The demo's layout: --flat inside an --out folder that does not exist yet.
"$bin" encode --model "$model" "$work/corpus" --out "$work/tok-new" --flat "$work/tok-new/flat.txt" >/dev/null \
  || fail "encode with --flat inside a new --out folder"
cmp -s "$work/flat.txt" "$work/tok-new/flat.txt" || fail "flat file inside --out differs"
/usr/bin/python3 - "$work" <<'PY' || fail "token files or manifest do not match (numpy check)"
import json, sys, numpy as np
w = sys.argv[1]
for line in open(f"{w}/tok/manifest.jsonl"):
    e = json.loads(line)
    a = np.load(f"{w}/tok/{e['tokens']}")
    assert a.dtype == np.int16 and a.ndim == 2 and a.flags.c_contiguous, a.dtype
    assert a.shape == (e["frames"], e["depth"]) and e["depth"] == 3, (a.shape, e)
    assert a.min() >= 0 and a.max() < e["codebook_size"] == 16
    assert abs(e["frame_rate"] - 25.0) < 1e-9 and e["sample_rate"] == 16000
first = [int(t) for t in open(f"{w}/flat.txt").readline().split()]
assert all(first[i] // 16 == i % 3 for i in range(len(first))), "stage offsets in the flat form"
PY
# A rerun skips everything; shards partition the files and their manifests concatenate.
"$bin" encode --model "$model" "$work/corpus" --out "$work/tok" | grep -q "4 already done" || fail "rerun did not skip"
# Sharding (0-based, as batch schedulers number array tasks): the union of 0/3, 1/3 and 2/3
# equals the unsharded output file by file, byte for byte, and the shards never overlap.
for i in 0 1 2; do "$bin" encode --model "$model" "$work/corpus" --out "$work/shards" --shard $i/3 >/dev/null; done
[ "$(cat "$work"/shards/manifest.shard-*-of-3.jsonl | wc -l)" -eq 4 ] || fail "shard manifests do not hold 4 lines"
(cd "$work/tok" && find . -name '*.npy' | sort) >"$work/whole.list"
(cd "$work/shards" && find . -name '*.npy' | sort) >"$work/sharded.list"
cmp -s "$work/whole.list" "$work/sharded.list" || fail "sharded files differ from unsharded: $(diff "$work/whole.list" "$work/sharded.list")"
while read -r f; do cmp -s "$work/tok/$f" "$work/shards/$f" || fail "shard output $f differs from the unsharded one"; done <"$work/whole.list"
/usr/bin/python3 - "$work" <<'PY' || fail "shard manifests overlap or differ from the unsharded manifest"
import json, sys
w = sys.argv[1]
def entries(paths):
    return [json.loads(l) for p in paths for l in open(p)]
whole = {e["tokens"]: e for e in entries([f"{w}/tok/manifest.jsonl"])}
parts = entries([f"{w}/shards/manifest.shard-{i}-of-3.jsonl" for i in range(3)])
assert len(parts) == len({e["tokens"] for e in parts}) == len(whole), "a file in two shards"
for e in parts:
    assert e == whole[e["tokens"]], (e, whole[e["tokens"]])
PY

tokens=$(find "$work/tok" -name '*.npy' | sort | head -1)
"$bin" decode --model "$model" "$tokens" -o "$work/d2.wav" --depth 2 --iters 8 >/dev/null
[ -s "$work/d2.wav" ] || fail "decode wrote nothing"

"$bin" ladder --model "$model" "$work/corpus/example-safety.wav" -o "$work/ladder" >/dev/null
for f in original oracle depth-1 depth-2 depth-3; do [ -s "$work/ladder/$f.wav" ] || fail "ladder lacks $f.wav"; done
"$bin" evaluate --model "$model" "$work/corpus" --json --csv "$work/eval.csv" >"$work/eval.json"
/usr/bin/python3 - "$work" <<'PY' || fail "ladder.json / evaluate --json do not follow the schema"
import json, sys
w = sys.argv[1]
for j in (json.load(open(f"{w}/ladder/ladder.json")), json.load(open(f"{w}/eval.json"))):
    assert set(["model_id", "frame_rate", "codebook_size", "depths", "oracle", "stages"]) <= set(j)
    assert [d["depth"] for d in j["depths"]] == [1, 2, 3]
    for d in j["depths"]:
        assert set(d) == {"depth", "kbps", "entropy_kbps", "feature_mel_l1", "feature_mcd_db", "mel_l1", "mcd_db",
                          "spectral_convergence"}
        assert d["entropy_kbps"] <= d["kbps"] + 1e-9   # entropy never exceeds log2(K) bits
    assert abs(j["depths"][2]["kbps"] - 25 * 3 * 4 / 1000) < 1e-9
    assert set(j["oracle"]) == {"mel_l1", "mcd_db", "spectral_convergence"}
    assert [s["stage"] for s in j["stages"]] == [1, 2, 3]
PY

# Refusals: each exits 1 or 2 with a message, and writes nothing.
/usr/bin/python3 - "$work" <<'PY'
import numpy as np, sys
w = sys.argv[1]
np.save(f"{w}/big.npy", np.full((10, 3), 16, dtype=np.int16))
np.save(f"{w}/neg.npy", np.full((10, 3), -1, dtype=np.int16))
np.save(f"{w}/f32.npy", np.zeros((10, 3), dtype=np.float32))
np.save(f"{w}/fortran.npy", np.asfortranarray(np.zeros((10, 3), dtype=np.int16)))
np.save(f"{w}/deep.npy", np.zeros((10, 5), dtype=np.int16))
PY
refuse() {
  local name=$1 pattern=$2; shift 2
  set +e
  "$bin" "$@" >/dev/null 2>"$work/err"
  local rc=$?
  set -e
  { [ $rc -eq 1 ] || [ $rc -eq 2 ]; } || fail "$name: exit code $rc"
  grep -q -E -e "$pattern" "$work/err" || fail "$name: message '$(cat "$work/err")' lacks /$pattern/"
  [ ! -e "$work/out.wav" ] || fail "$name: wrote an output"
  echo "ok   $name: $(cat "$work/err")"
}
refuse "code >= K" "outside 0..15" decode --model "$model" "$work/big.npy" -o "$work/out.wav"
refuse "negative code" "outside 0..15" decode --model "$model" "$work/neg.npy" -o "$work/out.wav"
refuse "float tokens" "f32.npy" decode --model "$model" "$work/f32.npy" -o "$work/out.wav"
refuse "fortran order" "fortran.npy" decode --model "$model" "$work/fortran.npy" -o "$work/out.wav"
refuse "depth beyond model" "5 but the model has 3" decode --model "$model" "$work/deep.npy" -o "$work/out.wav"
refuse "depth beyond file" "expected 1..3" decode --model "$model" "$tokens" -o "$work/out.wav" --depth 4
cp "$work/tok/manifest.jsonl" "$work/manifest.kept"
sed -i 's/"model_id":"[0-9a-f]*"/"model_id":"0000000000000000"/' "$work/tok/manifest.jsonl"
refuse "model id mismatch" "was made by model 0000000000000000" decode --model "$model" "$tokens" -o "$work/out.wav"
mv "$work/manifest.kept" "$work/tok/manifest.jsonl"
refuse "bad shard" "--shard" encode --model "$model" "$work/corpus" --out "$work/x" --shard 2/2
refuse "decode depth 0" "depth" decode --model "$model" "$tokens" -o "$work/out.wav" --depth 0
refuse "encode depth 0" "depth" encode --model "$model" "$work/corpus" --out "$work/x" --depth 0
refuse "encode depth beyond model" "the model has 3" encode --model "$model" "$work/corpus" --out "$work/x" --depth 4
[ ! -e "$work/x" ] || fail "a refused encode left an output folder"
refuse "missing model (decode)" "nothing.safetensors" decode --model "$work/nothing.safetensors" "$tokens" -o "$work/out.wav"
refuse "missing model (encode)" "nothing.safetensors" encode --model "$work/nothing.safetensors" "$work/corpus" --out "$work/x"
refuse "missing model (evaluate)" "nothing.safetensors" evaluate --model "$work/nothing.safetensors" "$work/corpus"
refuse "missing tokens" "none.npy" decode --model "$model" "$work/none.npy" -o "$work/out.wav"
head -c 100 "$model" >"$work/cut.safetensors"
refuse "truncated model" "cut.safetensors" decode --model "$work/cut.safetensors" "$tokens" -o "$work/out.wav"
[ ! -e "$work/x" ] || fail "a refused encode left an output folder"

# Corrupt token files (NumPy NEP 1 format 1.0: magic \x93NUMPY, version 1.0, uint16 header
# length, a dict literal padded with spaces to a multiple of 64 bytes, then the data).
/usr/bin/python3 - "$work" "$tokens" <<'PY'
import random, struct, sys
w, good = sys.argv[1], open(sys.argv[2], "rb").read()
hlen = struct.unpack("<H", good[8:10])[0]
head, data = good[: 10 + hlen], good[10 + hlen :]
def npy(header, payload=data, magic=b"\x93NUMPY\x01\x00"):
    h = header.encode("latin1")
    h += b" " * ((64 - (10 + len(h) + 1) % 64) % 64) + b"\n"
    return magic + struct.pack("<H", len(h)) + h + payload
rows = len(data) // 6
cases = {
    "truncated-data": good[: len(good) - 7],
    "truncated-header": good[:40],
    "empty": b"",
    "bad-magic": b"\x93NUMPZ" + good[6:],
    "version-3": good[:6] + b"\x03\x00" + good[8:],
    "header-longer-than-file": good[:8] + struct.pack("<H", 60000) + good[10:],
    "int64": npy("{'descr': '<i8', 'fortran_order': False, 'shape': (%d, 3), }" % rows),
    "big-endian": npy("{'descr': '>i2', 'fortran_order': False, 'shape': (%d, 3), }" % rows),
    "one-dim": npy("{'descr': '<i2', 'fortran_order': False, 'shape': (%d,), }" % (rows * 3)),
    "huge-shape": npy("{'descr': '<i2', 'fortran_order': False, 'shape': (4611686018427387904, 3), }"),
    "negative-shape": npy("{'descr': '<i2', 'fortran_order': False, 'shape': (-5, 3), }"),
    "shape-too-big-for-data": npy("{'descr': '<i2', 'fortran_order': False, 'shape': (%d, 3), }" % (rows + 1)),
    "not-a-dict": npy("[1, 2, 3]"),
    "no-descr": npy("{'fortran_order': False, 'shape': (%d, 3), }" % rows),
    "zero-frames": npy("{'descr': '<i2', 'fortran_order': False, 'shape': (0, 3), }", b""),
}
for name, b in cases.items():
    open(f"{w}/corrupt-{name}.npy", "wb").write(b)
# Seeded random damage to the header bytes: each must be refused or decoded, never crash.
rng = random.Random(7)
for i in range(40):
    b = bytearray(good)
    for _ in range(rng.randint(1, 4)):
        b[rng.randrange(6, 10 + hlen)] = rng.randrange(256)
    open(f"{w}/fuzz-{i:02d}.npy", "wb").write(bytes(b))
PY
for f in "$work"/corrupt-*.npy; do
  refuse "corrupt token file $(basename "$f")" "$(basename "$f")" decode --model "$model" "$f" -o "$work/out.wav"
done
for f in "$work"/fuzz-*.npy; do
  set +e
  "$bin" decode --model "$model" "$f" -o "$work/out.wav" --iters 2 >/dev/null 2>"$work/err"
  rc=$?
  set -e
  [ $rc -le 2 ] || fail "$(basename "$f"): exit code $rc (a crash?): $(cat "$work/err")"
  if [ $rc -ne 0 ]; then
    [ ! -e "$work/out.wav" ] || fail "$(basename "$f"): refused but wrote an output"
    [ -s "$work/err" ] || fail "$(basename "$f"): refused without a message"
  fi
  rm -f "$work/out.wav"
done
echo "ok   40 randomly damaged headers: each refused with a message or decoded, none crashed"
ls "$work"/*.tmp "$work"/.*.tmp 2>/dev/null && fail "temporary files left behind"
echo "all end-to-end checks passed"
