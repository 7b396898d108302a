#!/usr/bin/env bash
# Fuzz smoke run: builds the libFuzzer targets with clang in build-fuzz/ (-DTESSERA_FUZZ=ON),
# makes seed corpora from committed files, replays the committed regression inputs
# (tests/fuzz/regressions/<target>/), then fuzzes each target for SECONDS (default 60).
# Exits non-zero on any crash; the crashing input is saved as
# build-fuzz/fuzz/crashes/<target>-crash-<sha1> and the table of executions per target is
# build-fuzz/fuzz/summary.txt. The corpus grows in build-fuzz/fuzz/corpus/<target>/ across runs.
# Usage: bash tests/fuzz/run_fuzz.sh [seconds] [target ...]     (targets: npy safetensors
#        model config manifest audio; default all)
set -euo pipefail
cd "$(dirname "$0")/../.."
seconds=${1:-60}
shift || true
src=$PWD
out=build-fuzz/fuzz

launcher=()
command -v ccache >/dev/null && launcher=(-DCMAKE_CXX_COMPILER_LAUNCHER=ccache)
cmake -S . -B build-fuzz -DCMAKE_BUILD_TYPE=Release -DTESSERA_NATIVE=OFF -DTESSERA_FUZZ=ON \
  -DTESSERA_TESTS=OFF -DTESSERA_BENCH=OFF -DCMAKE_CXX_COMPILER=clang++ "${launcher[@]}" >/dev/null
cmake --build build-fuzz -j"$(nproc)" --target fuzz_targets

# Seeds: valid (and some deliberately damaged) files of each kind, all committed or made
# from committed files.
seeds=$out/seeds
rm -rf "$seeds"
mkdir -p "$seeds"/{npy,safetensors,model,config,manifest,audio} "$out/crashes"
"$out/fuzz_make_seeds" "$seeds"                                   # model/, audio/
cp tests/fixtures/formats/*.npy "$seeds/npy/"
cp tests/fixtures/formats/*.safetensors "$seeds/model/seed_model.safetensors" "$seeds/safetensors/"
cp tests/fixtures/formats/small.safetensors "$seeds/model/"
cp configs/*.yaml tests/fuzz/seed_model.yaml "$seeds/config/"
cat > "$seeds/manifest/manifest.jsonl" <<'JSONL'
{"codebook_size":1024,"depth":8,"duration_s":2.31,"frame_rate":25.0,"frames":57,"model_id":"0123456789abcdef","sample_rate":16000,"source":"corpus/a.wav","tokens":"a.npy"}
{"codebook_size":16,"depth":2,"duration_s":0.5,"frame_rate":12.5,"frames":6,"model_id":"fedcba9876543210","sample_rate":8000,"source":"b c/ü.flac","tokens":"sub/b.npy"}
JSONL

export LSAN_OPTIONS=suppressions=$src/tests/lsan.supp${LSAN_OPTIONS:+:$LSAN_OPTIONS}
export UBSAN_OPTIONS=print_stacktrace=1${UBSAN_OPTIONS:+:$UBSAN_OPTIONS}
targets=("$@")
[ ${#targets[@]} -gt 0 ] || targets=(npy safetensors model config manifest audio)
status=0
summary=$out/summary.txt
printf '%-12s %8s %12s %10s %s\n' target seconds executions exec/s result > "$summary"
for t in "${targets[@]}"; do
  bin=$out/fuzz_$t
  corpus=$out/corpus/$t
  mkdir -p "$corpus"
  regressions=()
  [ -d "tests/fuzz/regressions/$t" ] && regressions=("tests/fuzz/regressions/$t")
  log=$out/$t.log
  echo "== fuzz_$t: ${seconds} s"
  # -timeout: one input may take at most 10 s; -rss_limit_mb: libFuzzer's default, spelled out.
  if "$bin" -max_total_time="$seconds" -timeout=10 -rss_limit_mb=2048 -print_final_stats=1 \
       -artifact_prefix="$out/crashes/$t-" "$corpus" "$seeds/$t" "${regressions[@]}" > "$log" 2>&1; then
    result=ok
  else
    result=CRASH
    status=1
    grep -E "ERROR|runtime error|==[0-9]+==|Test unit written" "$log" | head -20 || true
  fi
  execs=$(sed -n 's/^stat::number_of_executed_units: *//p' "$log" | tail -1)
  rate=$(sed -n 's/^stat::average_exec_per_sec: *//p' "$log" | tail -1)
  printf '%-12s %8s %12s %10s %s\n' "$t" "$seconds" "${execs:-?}" "${rate:-?}" "$result" >> "$summary"
done
cat "$summary"
[ $status -eq 0 ] || echo "fuzzing found crashes: see $out/crashes/ and $out/<target>.log" >&2
exit $status
