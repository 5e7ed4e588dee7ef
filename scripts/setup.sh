#!/usr/bin/env bash
# Shared set-up for the README commands: install missing Debian packages, configure, build.
# Usage: source scripts/setup.sh; plaudit_setup [BUILD_DIR] [extra cmake args...]
set -euo pipefail

PLAUDIT_ROOT="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
# Build and test dependencies, all Debian packages. python3-* are only for regenerating fixtures
# and for the export-recipe tests, which say when they skip.
PLAUDIT_PACKAGES=(build-essential cmake pkg-config libeigen3-dev libnlopt-cxx-dev libfmt-dev
  libcli11-dev catch2 nlohmann-json3-dev libzip-dev)

plaudit_install_packages() {
  local missing=()
  for p in "${PLAUDIT_PACKAGES[@]}" "$@"; do
    dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed" || missing+=("$p")
  done
  [ ${#missing[@]} -eq 0 ] && return 0
  if [ "$(id -u)" -ne 0 ]; then
    echo "plaudit needs these Debian packages; run as root:" >&2
    echo "  apt-get update && apt-get install -y ${missing[*]}" >&2
    exit 1
  fi
  echo "installing: ${missing[*]}"
  export DEBIAN_FRONTEND=noninteractive
  apt-get update -qq
  apt-get install -y -qq --no-install-recommends "${missing[@]}" >/dev/null
}

plaudit_build() {
  local build_dir="${1:-$PLAUDIT_ROOT/build}"
  shift || true
  cmake -S "$PLAUDIT_ROOT" -B "$build_dir" -DCMAKE_BUILD_TYPE=Release "$@" >/dev/null
  cmake --build "$build_dir" -j "$(nproc)"
}
