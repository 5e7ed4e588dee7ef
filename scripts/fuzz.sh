#!/usr/bin/env bash
# Fuzz the readers: builds the libFuzzer targets of fuzz/ with clang (ASan + UBSan) in
# build-fuzz, then runs each for SECONDS seconds on a working copy of its seed corpus
# (BUILD/fuzz-work/<target>; the committed fuzz/corpus/ is only read) and prints one line per
# target: runs executed and what was found. Exits non-zero when any target found something
# (crash, sanitizer report, leak, timeout, out-of-memory); the inputs are in
# BUILD/fuzz-artifacts/<target>/ and the full output in BUILD/fuzz-logs/<target>.log.
#   scripts/fuzz.sh 120                      two minutes per target
#   PLAUDIT_FUZZ_BUILD=/tmp/f scripts/fuzz.sh 30
#   PLAUDIT_FUZZ_TARGETS="fuzz_npy fuzz_npz" scripts/fuzz.sh 60
# Reproduce one finding: BUILD/fuzz/fuzz_npz BUILD/fuzz-artifacts/fuzz_npz/crash-...
set -euo pipefail
source "$(dirname "${BASH_SOURCE[0]}")/setup.sh"
plaudit_install_packages clang libclang-rt-dev

if [ $# -ne 1 ] || ! [[ "$1" =~ ^[0-9]+$ ]] || [ "$1" -eq 0 ]; then
  echo "usage: scripts/fuzz.sh SECONDS   (seconds per target)" >&2
  exit 64
fi
seconds="$1"
build="${PLAUDIT_FUZZ_BUILD:-$PLAUDIT_ROOT/build-fuzz}"
targets=(${PLAUDIT_FUZZ_TARGETS:-fuzz_npy fuzz_npz fuzz_manifest fuzz_scalars})

CC=clang CXX=clang++ cmake -S "$PLAUDIT_ROOT" -B "$build" -DCMAKE_BUILD_TYPE=RelWithDebInfo \
  -DPLAUDIT_FUZZ=ON -DPLAUDIT_TESTS=OFF -DPLAUDIT_BENCH=OFF >/dev/null
cmake --build "$build" -j "$(nproc)" --target "${targets[@]}" >/dev/null

found_any=0
for t in "${targets[@]}"; do
  work="$build/fuzz-work/$t"
  artifacts="$build/fuzz-artifacts/$t"
  log="$build/fuzz-logs/$t.log"
  # The working corpus keeps what earlier runs added; the seeds are copied in again each time.
  mkdir -p "$work" "$(dirname "$log")"
  cp -n "$PLAUDIT_ROOT/fuzz/corpus/$t/"* "$work/"
  rm -rf "$artifacts" && mkdir -p "$artifacts"
  dict=()
  [ -f "$PLAUDIT_ROOT/fuzz/dicts/$t.dict" ] && dict=(-dict="$PLAUDIT_ROOT/fuzz/dicts/$t.dict")
  status=0
  "$build/fuzz/$t" -max_total_time="$seconds" -rss_limit_mb=2048 -timeout=10 -print_final_stats=1 \
    -artifact_prefix="$artifacts/" "${dict[@]}" "$work" >"$log" 2>&1 || status=$?
  # Executed inputs from the final stats, else from the last progress line.
  runs="$(sed -n 's/^stat::number_of_executed_units: *//p' "$log" | tail -n 1)"
  [ -n "$runs" ] || runs="$(grep -o '^#[0-9]*' "$log" | tail -n 1 | tr -d '#' || true)"
  findings=("$artifacts"/crash-* "$artifacts"/leak-* "$artifacts"/timeout-* "$artifacts"/oom-*)
  findings=($(ls -d "${findings[@]}" 2>/dev/null || true))
  if [ ${#findings[@]} -gt 0 ] || [ "$status" -ne 0 ]; then
    found_any=1
    kind="$(grep -m 1 -oE 'ERROR: (AddressSanitizer|LeakSanitizer|libFuzzer): [a-zA-Z-]+|runtime error: .*|invariant violated: .*' "$log" || true)"
    echo "$t: ${runs:-?} runs, FOUND (exit $status) ${kind:-see log}: ${findings[*]:-no artifact} (log $log)"
  else
    echo "$t: ${runs:-?} runs, nothing found (corpus $(ls "$work" | wc -l) files)"
  fi
done
exit "$found_any"
