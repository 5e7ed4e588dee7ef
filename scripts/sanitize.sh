#!/usr/bin/env bash
# The default test suite under AddressSanitizer + UndefinedBehaviorSanitizer (PLAUDIT_SANITIZE),
# in build-sanitize. Any report aborts the test that triggered it (-fno-sanitize-recover), so a
# clean run is a pass. Leak checking is on; the benchmark target is left out.
set -euo pipefail
source "$(dirname "${BASH_SOURCE[0]}")/setup.sh"
plaudit_install_packages
build="$PLAUDIT_ROOT/build-sanitize"
cmake -S "$PLAUDIT_ROOT" -B "$build" -DCMAKE_BUILD_TYPE=RelWithDebInfo -DPLAUDIT_SANITIZE=ON -DPLAUDIT_TESTS=ON \
  -DPLAUDIT_BENCH=OFF >/dev/null
cmake --build "$build" -j "$(nproc)"
cd "$build"
export ASAN_OPTIONS="detect_leaks=1:abort_on_error=1:strict_string_checks=1"
export UBSAN_OPTIONS="print_stacktrace=1:halt_on_error=1"
ctest --output-on-failure -j "$(nproc)"
