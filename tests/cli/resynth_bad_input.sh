#!/usr/bin/env bash
# resynth_bad_input.sh — bad input through the real binary: each case must exit 1 or 2
# without a signal, print one "error: ..." line on stderr that names the problem, and
# leave no output file. Usage: resynth_bad_input.sh TESSERA_BINARY SOURCE_DIR
set -u
bin=$1
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
fails=0

# expect NAME PATTERN ARGS... : run tessera ARGS, check the exit code, stderr and no output.
expect() {
  local name=$1 pattern=$2; shift 2
  rm -f "$work/out.wav"
  "$bin" "$@" >"$work/stdout" 2>"$work/stderr"
  local rc=$?
  local err
  err=$(cat "$work/stderr")
  if [ $rc -ne 1 ] && [ $rc -ne 2 ]; then
    echo "FAIL $name: exit code $rc (want 1 or 2)"; fails=$((fails + 1))
  elif ! grep -q -E "$pattern" "$work/stderr"; then
    echo "FAIL $name: stderr does not match /$pattern/: $err"; fails=$((fails + 1))
  elif [ "$(wc -l <"$work/stderr")" -gt 2 ]; then
    echo "FAIL $name: more than one message: $err"; fails=$((fails + 1))
  elif ls "$work"/out.wav* >/dev/null 2>&1; then
    echo "FAIL $name: an output file was left behind"; fails=$((fails + 1))
  else
    echo "ok   $name: $err"
  fi
}

printf 'words, not sound\n' >"$work/text.wav"
: >"$work/empty.wav"
# A valid 16-bit WAV header that promises 1 s of audio, cut after 100 samples.
/usr/bin/python3 - "$work" <<'PY'
import math, struct, sys
d = sys.argv[1]
def wav(path, fmt_tag, bits, samples, claimed=None, rate=16000):
    block = bits // 8
    data = b"".join(struct.pack("<h" if bits == 16 else "<f", s) for s in samples)
    n = claimed if claimed is not None else len(data)
    hdr = b"RIFF" + struct.pack("<I", 36 + n) + b"WAVE"
    hdr += b"fmt " + struct.pack("<IHHIIHH", 16, fmt_tag, 1, rate, rate * block, block, bits)
    hdr += b"data" + struct.pack("<I", n)
    open(path, "wb").write(hdr + data)
wav(f"{d}/truncated.wav", 1, 16, [int(1000 * math.sin(i / 5)) for i in range(100)], claimed=32000)
wav(f"{d}/nan.wav", 3, 32, [float("nan")] * 1600)
wav(f"{d}/good.wav", 1, 16, [int(8000 * math.sin(i / 5)) for i in range(16000)])
PY
printf 'audio:\n  sample_rate: 16000\n  n_ffts: 512\n' >"$work/unknown.yaml"
printf 'audio:\n  n_fft: 512\n' >"$work/unreadable.yaml"
chmod 000 "$work/unreadable.yaml"

expect "missing file" "no such file" resynth "$work/none.wav" -o "$work/out.wav"
expect "text named .wav" "text.wav" resynth "$work/text.wav" -o "$work/out.wav"
expect "zero-length file" "empty.wav" resynth "$work/empty.wav" -o "$work/out.wav"
expect "truncated wav" "truncated.wav" resynth "$work/truncated.wav" -o "$work/out.wav"
expect "NaN samples" "non-finite" resynth "$work/nan.wav" -o "$work/out.wav"
expect "unknown config key" "unknown.yaml:3: audio.n_ffts: unknown key" \
  resynth "$work/good.wav" -o "$work/out.wav" --config "$work/unknown.yaml"
expect "bad override" "audio.n_fft: expected an integer" \
  resynth "$work/good.wav" -o "$work/out.wav" --set audio.n_fft=huge
expect "output over input" "refusing to write" resynth "$work/good.wav" -o "$work/good.wav"
expect "output folder missing" "does not exist" resynth "$work/good.wav" -o "$work/nowhere/out.wav"
expect "no subcommand" "." --no-such-flag
mkdir "$work/folder.yaml"
expect "config is a folder" "folder.yaml" resynth "$work/good.wav" -o "$work/out.wav" --config "$work/folder.yaml"
if [ "$(id -u)" -ne 0 ]; then   # root reads any file, so the case only means something for others
  expect "unreadable config" "unreadable.yaml" \
    resynth "$work/good.wav" -o "$work/out.wav" --config "$work/unreadable.yaml"
else
  echo "skip unreadable config: running as root, who can read any file"
fi
# The input must be untouched by all of the above.
/usr/bin/python3 -c "import sys; d=open(sys.argv[1],'rb').read(); sys.exit(0 if len(d)==44+32000 else 1)" "$work/good.wav" \
  || { echo "FAIL good.wav was changed"; fails=$((fails + 1)); }
[ $fails -eq 0 ] || { echo "$fails case(s) failed"; exit 1; }
