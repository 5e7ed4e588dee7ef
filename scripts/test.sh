#!/usr/bin/env bash
# Install what is missing, build everything, and run the whole default test suite with ctest.
set -euo pipefail
source "$(dirname "${BASH_SOURCE[0]}")/setup.sh"
plaudit_install_packages
plaudit_build "$PLAUDIT_ROOT/build" -DPLAUDIT_TESTS=ON
cd "$PLAUDIT_ROOT/build"
ctest --output-on-failure -j "$(nproc)"
