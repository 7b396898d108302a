#!/usr/bin/env bash
# interrupt_resume.sh — a few random SIGKILLs of training and encoding
# (tests/interrupt/kill_trials.sh: every file loads, the resumed model is byte-identical,
# the encode rerun completes the corpus), then the folder lock: a second train, encode,
# ladder or report into a folder in use is refused naming the holder, and the lock a
# killed run left is taken over with a note. Usage: interrupt_resume.sh TESSERA_BINARY SOURCE_DIR
. "$(dirname "$0")/../cli_common.sh" "$@"

bash "$src/tests/interrupt/kill_trials.sh" "$bin" "$src" 3 2 1 || fail "kill trials"

mkdir -p "$work/corpus"
cp "$src"/samples/*.wav "$work/corpus/"
run=$work/run
# A run long enough to be caught holding its lock.
"$bin" train --out "$run" --corpus "$work/corpus" "${tiny_model_sets[@]}" --set train.steps=100000 \
  --set train.checkpoint_every=10 >"$work/first.log" 2>&1 &
first=$!
for _ in $(seq 1 200); do
  grep -q " $first " "$run/.tessera.lock" 2>/dev/null && [ -f "$run/train-state.safetensors" ] && break
  sleep 0.1
done
[ -f "$run/train-state.safetensors" ] || { kill -9 "$first"; fail "the long run wrote no checkpoint: $(cat "$work/first.log")"; }

expect_refused() {  # expect_refused LOG COMMAND...: exit 1 and the holder named
  local log=$1 rc=0
  shift
  "$@" >"$log" 2>&1 || rc=$?
  [ "$rc" -eq 1 ] || { kill -9 "$first"; fail "second instance exited $rc, expected 1: $(cat "$log")"; }
  grep -q "error: '$run' is in use by tessera train, pid $first on host" "$log" ||
    { kill -9 "$first"; fail "refusal message: $(cat "$log")"; }
}
expect_refused "$work/second.log" "$bin" train --out "$run" --corpus "$work/corpus" "${tiny_model_sets[@]}" --resume
expect_refused "$work/encode.log" "$bin" encode --model "$run/model.safetensors" "$work/corpus" --out "$run"
one_wav=$(ls "$work"/corpus/*.wav | head -1)
expect_refused "$work/ladder.log" "$bin" ladder --model "$run/model.safetensors" "$one_wav" --out "$run"
expect_refused "$work/report.log" "$bin" report --model "$run/model.safetensors" "$one_wav" --out "$run"
kill -0 "$first" || fail "the first run died while the second was refused"

# SIGKILL leaves .tessera.lock behind; the next run takes it over and continues.
kill -9 "$first"
wait "$first" 2>/dev/null || true
grep -q " $first " "$run/.tessera.lock" || fail "the killed run's lock file is gone"
"$bin" train --out "$run" --corpus "$work/corpus" "${tiny_model_sets[@]}" --set train.steps=30 --resume \
  >"$work/third.log" 2>&1 || fail "resume after the kill failed: $(cat "$work/third.log")"
grep -q "note: took over the lock of tessera train, pid $first on host .*, which is no longer running" "$work/third.log" ||
  fail "no takeover note: $(cat "$work/third.log")"
[ ! -e "$run/.tessera.lock" ] || fail "the lock file outlived its run"
ls "$run" | grep -q '\.tmp-' && fail "temporary files left: $(ls "$run")"

# ladder and report remove the temporary files a killed ladder or report left (a dead
# pid), and nothing else: a sharded encode's temporaries in the same folder stay.
true & dead=$!
wait "$dead"
mkdir -p "$work/pages"
: >"$work/pages/index.html.tmp-$dead"
: >"$work/pages/depth-1.wav.tmp-$dead"
: >"$work/pages/a.npy.tmp-$dead"
"$bin" report --model "$run/model.safetensors" "$one_wav" --out "$work/pages" >"$work/pages.log" 2>&1 ||
  fail "report into a folder with stale temporaries: $(cat "$work/pages.log")"
[ ! -e "$work/pages/index.html.tmp-$dead" ] || fail "report left a killed report's temporary file"
"$bin" ladder --model "$run/model.safetensors" "$one_wav" --out "$work/pages" >"$work/ladder2.log" 2>&1 ||
  fail "ladder into a folder with stale temporaries: $(cat "$work/ladder2.log")"
[ ! -e "$work/pages/depth-1.wav.tmp-$dead" ] || fail "ladder left a killed ladder's temporary file"
[ -e "$work/pages/a.npy.tmp-$dead" ] || fail "a temporary file of another command was removed"

# A run that fails before writing anything leaves no folder behind.
"$bin" train --out "$work/none" --corpus "$work/no-such-corpus" "${tiny_model_sets[@]}" >/dev/null 2>&1 &&
  fail "training on a missing corpus succeeded"
[ ! -e "$work/none" ] || fail "a failed run left its folder: $(ls -A "$work/none")"
echo "interrupt_resume: ok"
