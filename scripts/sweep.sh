#!/usr/bin/env bash
# The long statistical sweeps (Catch2 tag [sweep]), kept out of the default test run: e.g. the
# residual-fit calibration over 200 seeds (false-alarm rate on pure noise, power on planted signal).
set -euo pipefail
source "$(dirname "${BASH_SOURCE[0]}")/setup.sh"
plaudit_install_packages
plaudit_build "$PLAUDIT_ROOT/build" -DPLAUDIT_TESTS=ON
"$PLAUDIT_ROOT/build/tests/plaudit_tests" "[sweep]" --durations yes
