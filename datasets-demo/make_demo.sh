#!/usr/bin/env bash
# Regenerate the bundled demo: kiln.csv (NumPy, make_kiln_data.py) and two runs trained on it by
# `plaudit train`. Deterministic: the same commands give the same files.
# Usage: bash datasets-demo/make_demo.sh [path/to/plaudit]
set -euo pipefail
here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
plaudit="${1:-$here/../build/plaudit}"
python="${PYTHON:-/usr/bin/python3}"

"$python" "$here/make_kiln_data.py" -o "$here/kiln.csv" --rows 4000 --noise 0.1 --seed 20261202

# Stalled: every first-layer neuron starts as a copy of one neuron, so gradient descent keeps
# them identical and the network can only fit one ridge function of the readings.
"$plaudit" train "$here/kiln.csv" -o "$here/kiln-stalled" --target free_lime --widths 32 \
  --init collapsed --clusters 1 --lr 0.05 --steps 6000 --save-every 200 --seed 1 --overwrite -q \
  --notes "demo: collapsed initialisation (all 32 first-layer neurons identical)"

# Converged: the same data, 64 neurons with i.i.d. Gaussian initialisation.
"$plaudit" train "$here/kiln.csv" -o "$here/kiln-converged" --target free_lime --widths 64 \
  --lr 1 --steps 8000 --save-every 200 --seed 1 --overwrite -q \
  --notes "demo: i.i.d. Gaussian initialisation"
echo "demo runs written to $here"
