#!/usr/bin/env bash
# full_disk.sh — writes that hit a full disk, through the real binary, on a 2 MiB tmpfs
# (mounted here; needs root and permission to mount, else the test is skipped with exit
# 77). The file system is filled with a filler file and then given back a known amount of
# room, so each command runs out of space midway. For each: exit 1, one message naming the
# file and "no space left on device", no temporary file left, and every file written
# before stays whole and loadable; once room is made, a rerun finishes the job.
#   encode  into a folder that fills after a few files: the finished .npy files and the
#           manifest lines are valid; a rerun keeps them and encodes the rest.
#   train   whose second checkpoint does not fit: the first checkpoint (model and training
#           state) loads, and --resume continues from it.
#   decode and resynth over an existing output: the old file is untouched.
# Usage: full_disk.sh TESSERA_BINARY SOURCE_DIR
. "$(dirname "$0")/../cli_common.sh" "$@"
mnt=$work/tiny
mkdir -p "$mnt"
if [ "$(id -u)" -ne 0 ] || ! mount -t tmpfs -o size=2m tessera-full-disk "$mnt" 2>"$work/mount.err"; then
  echo "skipped: mounting a size-limited tmpfs needs root ($(cat "$work/mount.err" 2>/dev/null))"
  exit 77
fi
trap 'umount "$mnt" 2>/dev/null; rm -rf "$work"' EXIT

# leave_free KIB: fill the tmpfs completely, then give back KIB kibibytes.
leave_free() {
  dd if=/dev/zero of="$mnt/filler" bs=4k 2>/dev/null || true
  truncate -s -"$1"K "$mnt/filler"
}
# run_full NAME ARGS...: the command must fail for lack of space, cleanly.
run_full() {
  local name=$1; shift
  set +e
  "$bin" "$@" >"$work/$name.out" 2>"$work/$name.err"
  local rc=$?
  set -e
  [ $rc -eq 1 ] || fail "$name: exit code $rc, want 1: $(cat "$work/$name.err")"
  grep -q "^error: cannot write '$mnt/.*': no space left on device" "$work/$name.err" ||
    fail "$name: message does not name the file and 'no space left on device': $(cat "$work/$name.err")"
  ! find "$mnt" -name '*.tmp*' | grep -q . || fail "$name: temporary files left: $(find "$mnt" -name '*.tmp*')"
  echo "ok   $name: $(grep '^error' "$work/$name.err")"
}

# --- encode ----------------------------------------------------------------------------
mkdir -p "$work/corpus"
for i in $(seq -w 1 12); do for f in "$src"/samples/*.wav; do cp "$f" "$work/corpus/$i-$(basename "$f")"; done; done
train_tiny_model "$bin" "$src/samples" "$work/run" >"$work/train.log"
model=$work/run/model.safetensors
leave_free 40   # about ten 4 KiB pages: a few token files, then the manifest or a .npy fails
run_full "encode" encode --model "$model" "$work/corpus" --out "$mnt/tok" --jobs 2
check_tokens() {   # every manifest line is whole and names a loadable .npy of its shape
  /usr/bin/python3 - "$1" "$2" <<'PY'
import json, os, sys, numpy as np
out, want_min = sys.argv[1], int(sys.argv[2])
lines = open(os.path.join(out, "manifest.jsonl")).read().split("\n")
assert lines[-1] == "", "manifest ends in half a line"
entries = [json.loads(l) for l in lines[:-1]]
for e in entries:
    a = np.load(os.path.join(out, e["tokens"]))
    assert a.dtype == np.int16 and a.shape == (e["frames"], e["depth"]), (e, a.shape)
for root, _, files in os.walk(out):   # .npy files without a line (done by another worker) load too
    for f in files:
        if f.endswith(".npy"):
            np.load(os.path.join(root, f))
assert len(entries) >= want_min, f"{len(entries)} manifest lines, want at least {want_min}"
print(len(entries))
PY
}
done_before=$(check_tokens "$mnt/tok" 1) || fail "encode: the files written before the disk filled are damaged"
echo "ok   encode: $done_before finished files valid after the failure"
rm "$mnt/filler"
"$bin" encode --model "$model" "$work/corpus" --out "$mnt/tok" >"$work/encode2.out" 2>&1 || fail "encode rerun: $(cat "$work/encode2.out")"
grep -q "($done_before already done)" "$work/encode2.out" || fail "encode rerun did not keep the $done_before finished files: $(cat "$work/encode2.out")"
check_tokens "$mnt/tok" 48 >/dev/null || fail "encode rerun: output invalid"
echo "ok   encode rerun with room: $done_before kept, all 48 valid"
rm -rf "${mnt:?}"/*

# --- train -----------------------------------------------------------------------------
ckpt=(--set train.steps=20 --set train.checkpoint_every=5 --set train.log_every=5)
train_tiny_model "$bin" "$src/samples" "$work/sizes" "${ckpt[@]}" >/dev/null
kib=$(( ($(stat -c %s "$work/sizes/model.safetensors") + $(stat -c %s "$work/sizes/train-state.safetensors")) / 1024 ))
leave_free $((kib + 48))   # room for one checkpoint and the small files, not for a second model
set +e
train_tiny_model "$bin" "$src/samples" "$mnt/run" "${ckpt[@]}" >"$work/train-full.out" 2>"$work/train-full.err"
rc=$?
set -e
[ $rc -eq 1 ] || fail "train: exit code $rc, want 1: $(cat "$work/train-full.err")"
grep -q "^error: .*cannot write '$mnt/run/.*': no space left on device" "$work/train-full.err" ||
  fail "train: message does not name the file and 'no space left on device': $(cat "$work/train-full.err")"
! find "$mnt" -name '*.tmp*' | grep -q . || fail "train: temporary files left: $(find "$mnt" -name '*.tmp*')"
echo "ok   train: $(grep '^error' "$work/train-full.err")"
"$bin" inspect "$mnt/run/model.safetensors" >"$work/inspect.out" || fail "train: the model of the last checkpoint does not load"
step=$(sed -n 's/^trained *\([0-9]*\) steps.*/\1/p' "$work/inspect.out")
[ "${step:-0}" -ge 5 ] || fail "train: the kept model is at step '${step}', want a checkpoint (5, 10, ...): $(cat "$work/inspect.out")"
rm "$mnt/filler"
train_tiny_model "$bin" "$src/samples" "$mnt/run" "${ckpt[@]}" --resume >"$work/resume.out" 2>&1 ||
  fail "train --resume after the full disk: $(tail -3 "$work/resume.out")"
grep -q "resumed   at step $step of 20" "$work/resume.out" || fail "train did not resume at step $step: $(cat "$work/resume.out")"
echo "ok   train: the step-$step checkpoint loads and --resume finishes the run"
rm -rf "${mnt:?}"/*

# --- decode and resynth over an existing output --------------------------------------------
"$bin" encode --model "$model" "$src/samples/example-safety.wav" --out "$work/one" >/dev/null
tokens=$work/one/example-safety.npy
"$bin" decode --model "$model" "$tokens" -o "$mnt/decoded.wav" --iters 2 >/dev/null
"$bin" resynth "$src/samples/example-safety.wav" -o "$mnt/resynth.wav" --set audio.griffin_lim_iters=2 >/dev/null
sum_before=$(md5sum "$mnt/decoded.wav" "$mnt/resynth.wav")
leave_free 8
run_full "decode" decode --model "$model" "$tokens" -o "$mnt/decoded.wav" --iters 2
run_full "resynth" resynth "$src/samples/example-safety.wav" -o "$mnt/resynth.wav" --set audio.griffin_lim_iters=2
[ "$(md5sum "$mnt/decoded.wav" "$mnt/resynth.wav")" = "$sum_before" ] || fail "a failed write changed the earlier output"
echo "ok   decode, resynth: the earlier outputs are unchanged"
echo "full-disk checks passed"
