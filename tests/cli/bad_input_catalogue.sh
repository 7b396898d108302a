#!/usr/bin/env bash
# bad_input_catalogue.sh — runs every case of tests/bad_inputs/cases.tsv through the real
# binary. A tiny model and its code files are made first; make_bad_inputs.py derives the
# damaged files from them. For each case: the exit code is the table's, no signal and no
# hang (< 128), stderr matches the table's pattern, and no file in the work folder was
# created, changed or removed (paths, sizes, mtimes, MD5s), nor a temporary file left.
# Accepted cases (exit 0) may write only below accepted/<name>, and must write there.
# Usage: bad_input_catalogue.sh TESSERA_BINARY SOURCE_DIR [NAME_REGEX]
. "$(dirname "$0")/../cli_common.sh" "$@"
only=${3:-.}
table=$src/tests/bad_inputs/cases.tsv

W=$work/w
mkdir -p "$W/accepted" "$W/out"
train_tiny_model "$bin" "$src/samples" "$work/run" >"$work/train.log" || fail "tiny model: $(tail -3 "$work/train.log")"
"$bin" encode --model "$work/run/model.safetensors" "$src/samples" --out "$work/tok" >/dev/null
cp "$work/run/model.safetensors" "$W/model.safetensors"
cp "$(find "$work/tok" -name '*.npy' | sort | head -1)" "$W/tokens.npy"
/usr/bin/python3 "$src/tests/bad_inputs/make_bad_inputs.py" "$W" "$W/model.safetensors" "$W/tokens.npy" ||
  fail "make_bad_inputs.py failed"

# Names the table's command lines may use.
MODEL=$W/model.safetensors
TOKENS=$W/tokens.npy
SAMPLES=$src/samples
TINY="--set model.channels=16 --set model.latent_dim=8 --set codebooks.stages=3 --set codebooks.codes=16 \
--set codebooks.kmeans_init_batches=1 --set codebooks.kmeans_init_vectors=64 --set train.segment_frames=64 \
--set train.batch_size=4 --set train.steps=4 --set train.warmup_steps=1 --set train.validate_every=2 \
--set train.validation_segments=4"
FAST="--set audio.griffin_lim_iters=4"

# One line per file or folder: path, type, and for files size, mtime, mode and MD5 (FIFOs
# are listed, never opened). Folder mtimes are left out: a refused write may create and
# remove its temporary file.
snapshot() {
  (cd "$W" && find . ! -type d -printf '%p %y %s %T@ %m\n' -o -type d -printf '%p d\n' | sort) >"$1.list"
  (cd "$W" && find . -type f -print0 | sort -z | xargs -0 md5sum | awk '{print $2, $1}') >"$1.md5"
  cat "$1.list" "$1.md5" >"$1"
}

cases=0 passed=0
while IFS=$'\t' read -r name want pattern cmd; do
  [[ -z $name || $name == \#* ]] && continue
  [[ $name =~ $only ]] || continue
  cases=$((cases + 1))
  OUT=$W/out/$name
  KEEP=$W/accepted/$name
  eval "args=($cmd)"
  snapshot "$work/before"
  set +e
  timeout 300 "$bin" "${args[@]}" >"$work/stdout" 2>"$work/stderr"
  rc=$?
  set -e
  snapshot "$work/after"
  err=$(head -c 400 "$work/stderr" | tr '\n' ' ')
  changed=$(diff "$work/before" "$work/after" | grep '^[<>]' | cut -c3- | cut -d' ' -f1 | sort -u || true)
  [ "$want" = 0 ] && changed=$(grep -v -E "^\./accepted/$name(/|$|\.)" <<<"$changed" || true)
  temps=$(find "$W" -name '*.tmp*' ! -type p | head -3)
  why=
  if [ $rc -ge 124 ]; then why="exit code $rc: a signal, a crash or a hang"
  elif [ "$rc" != "$want" ]; then why="exit code $rc, want $want"
  elif ! grep -q -E -e "$pattern" "$work/stderr"; then why="stderr does not match /$pattern/"
  elif [ "$want" != 0 ] && [ "$(grep -c '^error: ' "$work/stderr")" -ne 1 ]; then why="not exactly one 'error: ' line"
  elif [ -n "$changed" ]; then why="files created, changed or removed: $(echo $changed)"
  elif [ -n "$temps" ]; then why="temporary files left: $(echo $temps)"
  elif [ "$want" = 0 ] && ! compgen -G "$KEEP*" >/dev/null; then why="accepted, but nothing written to $KEEP"
  fi
  if [ -z "$why" ]; then
    passed=$((passed + 1))
    echo "ok   $name: $err"
  else
    echo "FAIL $name: $why"
    echo "     stderr: $err"
  fi
done <"$table"
echo "bad-input catalogue: $cases cases, $passed passed"
[ "$cases" -gt 0 ] && [ "$passed" -eq "$cases" ]
