#!/usr/bin/env bash
# Install what is missing, build, and audit the bundled demo run that stalled.
set -euo pipefail
source "$(dirname "${BASH_SOURCE[0]}")/setup.sh"
plaudit_install_packages
plaudit_build "$PLAUDIT_ROOT/build" -DPLAUDIT_TESTS=OFF -DPLAUDIT_BENCH=OFF
cd "$PLAUDIT_ROOT"
status=0
./build/plaudit inspect datasets-demo/kiln-stalled || status=$?
exit "$status"
