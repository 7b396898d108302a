# bench_json.sh — `tessera bench --quick` on a tiny model: the JSON object's schema and the
# sanity of its values (positive, finite, min ≤ median ≤ max, ratios to the peer as
# computed from both sides), the table, and a stand-in peer script that prints the peer's
# JSON line format (torch_reference.py's keys) with fixed timings. No timing thresholds.
. "$(dirname "$0")/../cli_common.sh" "$@"
unset TESSERA_PEER
tiny=(--set model.channels=16 --set model.latent_dim=8 --set codebooks.stages=3 --set codebooks.codes=16
      --set train.segment_frames=64 --set train.batch_size=4)

"$bin" bench --quick --json --threads 1,2 --long-minutes 0.2 "${tiny[@]}" >"$work/plain.json" 2>"$work/plain.err" \
  || fail "bench --quick --json failed: $(cat "$work/plain.err")"
grep -q "no peer" "$work/plain.err" || fail "missing peer is not reported"

# Stand-in peer: the same argument list as torch_reference.py, every run 100 ms.
cat >"$work/peer.py" <<'PY'
import argparse, json
p = argparse.ArgumentParser()
for k in ("--mode", "--threads", "--repeats", "--warmup", "--batch", "--frames", "--utt-frames"):
    p.add_argument(k)
a = p.parse_args()
ms = {"median": 100.0, "min": 100.0, "max": 100.0, "all": [100.0] * int(a.repeats)}
out = {"mode": a.mode, "threads": int(a.threads), "other_process_cpu_fraction": 0.25, "blas_libs": ["/x/libblas.so.3"]}
if a.mode == "train":
    assert (a.batch, a.frames, a.utt_frames) == ("4", "64", None), a
    out.update(ms_per_step=ms, audio_s_per_step=32.0)
else:
    assert a.batch is None and a.frames is None and a.utt_frames == "1000", a  # tessera's shape
    out.update(ms=ms, audio_s=60.0)
print("peer log line")
print(json.dumps(out))
PY
"$bin" bench --quick --json --threads 1,2 --long-minutes 0.2 --peer "$work/peer.py" "${tiny[@]}" \
  >"$work/peer.json" 2>"$work/peer.err" || fail "bench with a peer failed: $(cat "$work/peer.err")"

python3 - "$work/plain.json" "$work/peer.json" <<'PY' || fail "bench JSON check failed"
import json, math, sys
plain, peer = (json.load(open(p)) for p in sys.argv[1:3])

def positive(v, what):
    assert isinstance(v, (int, float)) and math.isfinite(v) and v > 0, f"{what}: {v!r}"

for j in (plain, peer):
    assert j["threads"] == [1, 2], j["threads"]
    for k in ("train_step_ms", "encode_rtf", "decode_rtf"):
        assert sorted(j[k]) == ["1", "2"], (k, j[k])
        for t, v in j[k].items():
            positive(v, f"{k}[{t}]")
            s = j["spread"][k][t]
            assert s["min"] <= v <= s["max"], (k, t, s, v)
    for k in ("train_step", "encode", "decode"):
        for t in ("1", "2"):
            positive(j["peak_mb"][k][t], f"peak_mb.{k}[{t}]")
    positive(j["resynth_rtf"], "resynth_rtf")
    positive(j["resynth_rtf_per_core"], "resynth_rtf_per_core")
    positive(j["peak_mb"]["resynth"], "peak_mb.resynth")
    # The long-file figure is the real `tessera encode` process: more than an empty
    # process, far less than the machine (a tiny model on 12 s of audio).
    assert 1 < j["encode_1h_peak_mb"] < 4096, j["encode_1h_peak_mb"]
    assert abs(j["encode_long"]["audio_s"] - 12.0) < 1e-9, j["encode_long"]
    assert 0 <= j["other_load"] <= 1, j["other_load"]
    assert j["train_throughput_vs_1_thread"]["1"] == 1.0

assert plain["peer"] is None and "ratio_to_peer" not in plain
p = peer["peer"]
assert p["train_step_ms"] == {"1": 100.0, "2": 100.0}, p["train_step_ms"]
# 60 s of audio in 100 ms is 600x real time.
assert p["encode_rtf"] == {"1": 600.0, "2": 600.0} and p["decode_rtf"] == {"1": 600.0, "2": 600.0}, p
assert p["other_load"] == 0.25 and p["blas"] == "libblas.so.3", p
for t in ("1", "2"):
    positive(p["peak_mb"]["train_step"][t], "peer peak")
    r = peer["ratio_to_peer"]
    assert abs(r["train_step_ms"][t] - round(peer["train_step_ms"][t] / 100.0, 3)) < 2e-3, r
    assert abs(r["encode_rtf"][t] - round(peer["encode_rtf"][t] / 600.0, 3)) < 2e-3, r
PY

"$bin" bench --quick --threads 1 --long-minutes 0.2 "${tiny[@]}" >"$work/table.txt" 2>/dev/null || fail "bench table failed"
for row in "| train step" "| encode 10 s" "| decode 10 s" "| resynthesis" "| tessera encode of a 12 s WAV"; do
  grep -qF "$row" "$work/table.txt" || fail "table lacks '$row': $(cat "$work/table.txt")"
done
grep -q "peer: not given" "$work/table.txt" || fail "table does not say the peer is missing"

set +e
"$bin" bench --quick --threads 1,x "${tiny[@]}" >/dev/null 2>"$work/bad.err"
code=$?
set -e
[ "$code" = 1 ] && grep -q "error: --threads '1,x'" "$work/bad.err" || fail "bad --threads: exit $code, $(cat "$work/bad.err")"
echo "bench_json: ok"
