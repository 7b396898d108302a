#!/usr/bin/env bash
# kill_trials.sh — SIGKILL `tessera train` and `tessera encode` at random moments, then
# finish each run, and check that nothing is lost or damaged:
#   training: kill a run (and then its resumed run) at a random moment, uniform over 90%
#     of the time left; after every kill each model/state file present loads (model: `tessera
#     inspect`, which checks the stored id against the weights; state: its safetensors
#     layout; the next --resume loads it whole), and the finished run's model.safetensors
#     is byte-identical to an uninterrupted run's (same threads), and its metrics.jsonl
#     equals the uninterrupted run's line for line in every field but steps_per_s (a
#     timing); metrics lines fall every 4 steps and checkpoints every 10, so most resumes
#     start inside a metrics window;
#   encode (one thread, so that a run lasts as long as the reference; kills spread the
#     same way over the files left): the rerun
#     finishes, every .npy loads with NumPy and equals the uninterrupted output, the
#     manifest has one valid JSON line per input and ends with a newline.
# Usage: kill_trials.sh TESSERA_BINARY SOURCE_DIR [TRAIN_TRIALS [ENCODE_TRIALS [KILLS]]]
#   (defaults 20, 5 and 2 kills per trial). Prints a summary; exits 1 on any failure.
. "$(dirname "$0")/../cli_common.sh" "$@"
train_trials=${3:-20}
encode_trials=${4:-5}
kills=${5:-2}

mkdir -p "$work/corpus"
cp "$src"/samples/*.wav "$work/corpus/"
# Checkpoints every 10 steps, metrics every 4, 2 threads in every run; TRIAL_STEPS
# (default 300) sets the length of a run.
total=${TRIAL_STEPS:-300}
sets=("${tiny_model_sets[@]}" --set train.steps=$total --set train.checkpoint_every=10 --set train.log_every=4
      --set train.threads=2)

now() { date +%s.%N; }
# random_delay MAX: a uniformly random time in [0, MAX) seconds.
random_delay() { awk -v m="$1" -v r="$RANDOM$RANDOM" 'BEGIN { srand(r); printf "%.3f", rand() * m }'; }

# check_run_files RUN [RECORD]: the files of a run folder that exist must load (nothing cut
# short or mismatched); RECORD gets the step of the checkpoint found ("none" without one).
check_run_files() {
  local run=$1 record=${2:-/dev/null}
  if [ -f "$run/model.safetensors" ]; then
    "$bin" inspect "$run/model.safetensors" >/dev/null 2>"$work/inspect.err" ||
      fail "unloadable model after a kill: $(cat "$work/inspect.err")"
  fi
  /usr/bin/python3 - "$run" >>"$record" <<'PY' || fail "unloadable training state after a kill in $run"
import json, os, struct, sys
# safetensors layout (safetensors README, "Format"): 8-byte little-endian header length,
# JSON header, data block tiled exactly by the tensors' offsets.
p = os.path.join(sys.argv[1], "train-state.safetensors")
if os.path.exists(p):
    b = open(p, "rb").read()
    n = struct.unpack("<Q", b[:8])[0]
    h = json.loads(b[8:8 + n])
    spans = sorted(tuple(v["data_offsets"]) for k, v in h.items() if k != "__metadata__")
    end = 0
    for s, e in spans:
        assert s == end, (s, end)
        end = e
    assert 8 + n + end == len(b), "data block size"
    assert h["__metadata__"]["format"] == "tessera-train-state"
    print(h["__metadata__"]["step"])
else:
    print("none")
PY
}

# One training process: fresh while no checkpoint exists, else --resume.
start_train() {
  local run=$1 resume=()
  [ -f "$run/train-state.safetensors" ] && resume=(--resume)
  "$bin" train --out "$run" --corpus "$work/corpus" "${sets[@]}" "${resume[@]}" >>"$run.log" 2>&1 &
  pid=$!
}

# metrics_of FILE: its lines without the timing field, one canonical JSON text per line.
metrics_of() {
  /usr/bin/python3 -c '
import json, sys
for l in open(sys.argv[1]):
    j = json.loads(l)
    j.pop("steps_per_s", None)
    print(json.dumps(j, sort_keys=True))' "$1"
}

t0=$(now)
"$bin" train --out "$work/ref" --corpus "$work/corpus" "${sets[@]}" >"$work/ref.log" 2>&1 || fail "reference run failed"
train_s=$(awk -v a="$t0" -v b="$(now)" 'BEGIN { print b - a }')
metrics_of "$work/ref/metrics.jsonl" >"$work/ref.metrics"

landed=0 trials_hit=0 resumed=0 identical=0 rewritten=0 took_over=0 files=0
for trial in $(seq 1 "$train_trials"); do
  run=$work/train-$trial
  : >"$run.log"
  hit=0
  at=0   # the step of the run's checkpoint
  for _ in $(seq 1 "$kills"); do
    start_train "$run"
    # Uniform over 90% of the time the run still needs (the reference run's duration
    # scaled by the steps left), so that nearly every kill lands.
    sleep "$(random_delay "$(awk -v d="$train_s" -v a="$at" -v n="$total" 'BEGIN { print 0.9 * d * (n - a) / n }')")"
    if kill -9 "$pid" 2>/dev/null; then landed=$((landed + 1)) hit=1; fi
    wait "$pid" 2>/dev/null || true
    check_run_files "$run" "$work/kill-steps"
    at=$(tail -1 "$work/kill-steps")
    [ "$at" = none ] && at=0
    files=$((files + $(find "$run" -maxdepth 1 -name "*.safetensors" 2>/dev/null | wc -l)))
  done
  [ -f "$run/train-state.safetensors" ] && resumed=$((resumed + 1))
  trials_hit=$((trials_hit + hit))
  start_train "$run"
  wait "$pid" || fail "trial $trial: the finishing run failed: $(tail -3 "$run.log")"
  check_run_files "$run"
  cmp -s "$work/ref/model.safetensors" "$run/model.safetensors" ||
    fail "trial $trial: model differs from the uninterrupted run's"
  identical=$((identical + 1))
  metrics_of "$run/metrics.jsonl" >"$run.metrics"
  cmp -s "$work/ref.metrics" "$run.metrics" ||
    fail "trial $trial: metrics.jsonl differs from the uninterrupted run's: $(diff "$work/ref.metrics" "$run.metrics" | head -4)"
  grep -q "rewritten from the state" "$run.log" && rewritten=$((rewritten + 1))
  grep -q "took over the lock" "$run.log" && took_over=$((took_over + 1))
  rm -rf "$run"
done
echo "train:  $train_trials trials x $kills SIGKILLs at uniform random times (a run of $total steps takes $(printf %.1f "$train_s") s); $landed kills landed" \
     "on a running process ($trials_hit trials hit at least once); checkpoint found after each kill (step: count):" \
     "$(sort -n "$work/kill-steps" | uniq -c | awk '{ printf "%s%s: %s", (NR > 1 ? ", " : ""), $2, $1 }');" \
     "$files model/state files checked after kills, 0 unloadable; $resumed trials finished by" \
     "--resume; $identical/$train_trials final models byte-identical and metrics.jsonl equal (but for steps_per_s) to the uninterrupted run's; model rebuilt from" \
     "the state in $rewritten; stale lock taken over in $took_over"

# ---------------------------------------------------------------- encode
for d in a b c d e f g h i j k l; do mkdir -p "$work/many/$d" && cp "$src"/samples/*.wav "$work/many/$d/"; done
inputs=$(find "$work/many" -name '*.wav' | wc -l)
t0=$(now)
"$bin" encode --model "$work/ref/model.safetensors" "$work/many" --out "$work/tok-ref" --jobs 1 >/dev/null 2>&1 || fail "reference encode failed"
encode_s=$(awk -v a="$t0" -v b="$(now)" 'BEGIN { print b - a }')
elanded=0
for trial in $(seq 1 "$encode_trials"); do
  out=$work/tok-$trial
  for _ in $(seq 1 "$kills"); do
    done_files=0
    [ -f "$out/manifest.jsonl" ] && done_files=$(wc -l <"$out/manifest.jsonl")
    "$bin" encode --model "$work/ref/model.safetensors" "$work/many" --out "$out" --jobs 1 >/dev/null 2>&1 &
    pid=$!
    sleep "$(random_delay "$(awk -v d="$encode_s" -v a="$done_files" -v n="$inputs" 'BEGIN { print 0.9 * d * (n - a) / n }')")"
    if kill -9 "$pid" 2>/dev/null; then elanded=$((elanded + 1)); fi
    wait "$pid" 2>/dev/null || true
  done
  "$bin" encode --model "$work/ref/model.safetensors" "$work/many" --out "$out" >/dev/null 2>"$work/encode.err" ||
    fail "encode trial $trial: the rerun failed: $(cat "$work/encode.err")"
  /usr/bin/python3 - "$out" "$work/tok-ref" "$inputs" <<'PY' || fail "encode trial $trial: outputs damaged"
import json, os, sys, numpy as np
out, ref, inputs = sys.argv[1], sys.argv[2], int(sys.argv[3])
text = open(os.path.join(out, "manifest.jsonl")).read()
assert text.endswith("\n"), "partial last manifest line"
entries = [json.loads(l) for l in text.splitlines()]          # every line valid JSON
assert len(entries) == inputs == len({e["tokens"] for e in entries}), (len(entries), inputs)
for e in entries:
    a, b = np.load(os.path.join(out, e["tokens"])), np.load(os.path.join(ref, e["tokens"]))
    assert a.shape == (e["frames"], e["depth"]) and np.array_equal(a, b), e["tokens"]
npys = [f for _, _, fs in os.walk(out) for f in fs if f.endswith(".npy")]
assert len(npys) == inputs, len(npys)
left = [f for _, _, fs in os.walk(out) for f in fs if ".tmp-" in f or f.endswith(".lock")]
assert not left, left
PY
  rm -rf "$out"
done
echo "encode: $encode_trials trials x $kills SIGKILLs at uniform random times (encoding $inputs files takes $(printf %.1f "$encode_s") s);" \
     "$elanded kills landed; every rerun finished with all .npy loading and equal to the uninterrupted output," \
     "one valid manifest line per file, no temporary or lock file left"
