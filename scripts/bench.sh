#!/usr/bin/env bash
# Benchmark figures: builds Release with the benchmark target in build-bench, generates the
# workloads once (cached in build-bench/workloads) and prints per-component wall times, the
# gradient pass's GFLOP/s against the machine's own GEMM rate, and each component's lower bound.
# Arguments go to plaudit_bench:
#   scripts/bench.sh                 default workload (d=64, widths 512, N=8192, 40 snapshots)
#   scripts/bench.sh --scale         the 4x workload; prints the growth once both have been run
#   scripts/bench.sh --runs 9 --only gemm,gradient
# PLAUDIT_BENCH_NATIVE=1 builds with -march=native instead, in build-bench-native.
set -euo pipefail
source "$(dirname "${BASH_SOURCE[0]}")/setup.sh"
plaudit_install_packages

build="$PLAUDIT_ROOT/build-bench"
native=OFF
if [ "${PLAUDIT_BENCH_NATIVE:-0}" = 1 ]; then
  native=ON
  build="$PLAUDIT_ROOT/build-bench-native"
fi
cmake -S "$PLAUDIT_ROOT" -B "$build" -DCMAKE_BUILD_TYPE=Release -DPLAUDIT_BENCH=ON -DPLAUDIT_TESTS=OFF \
  -DPLAUDIT_NATIVE="$native" >/dev/null
cmake --build "$build" -j "$(nproc)" --target plaudit plaudit_bench >/dev/null
"$build/bench/plaudit_bench" "$@"
