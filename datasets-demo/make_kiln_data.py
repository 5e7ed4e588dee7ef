#!/usr/bin/env python3
"""Write kiln.csv, the demo data set of plaudit (tool: NumPy; run with Debian's python3-numpy).

Scenario (invented for the demo): a rotary lime kiln logs six process readings once a minute,
each as a deviation from its set-point in units of its normal spread, and the lab measures the
free-lime content of the product. The "plant" mapping readings to free lime is a fixed smooth
function of three mixtures of the readings (a burner-heat term, a feed-load term and a
draft-balance term) plus lab measurement noise. Nothing here is real plant data.
"""
import argparse

import numpy as np

COLUMNS = ["fuel_flow", "secondary_air_temp", "inlet_temp", "feed_rate", "rotation_speed",
           "draft_pressure", "free_lime"]


def plant(x):
    # Three mixtures of the readings, each passed through its own smooth response.
    heat = 0.8 * x[:, 0] + 0.5 * x[:, 1] + 0.3 * x[:, 2]
    load = 0.7 * x[:, 3] - 0.4 * x[:, 4] + 0.2 * x[:, 0]
    draft = 0.6 * x[:, 5] - 0.5 * x[:, 2] + 0.3 * x[:, 4]
    return 1.5 - 0.9 * np.tanh(heat - 0.3) + 0.6 * np.tanh(1.2 * load) + 0.4 * np.tanh(draft + 0.5) ** 2


def main():
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("-o", "--out", default="kiln.csv")
    ap.add_argument("--rows", type=int, default=2000)
    ap.add_argument("--noise", type=float, default=0.05, help="lab noise std of free lime (percent)")
    ap.add_argument("--seed", type=int, default=20261202)
    a = ap.parse_args()
    rng = np.random.default_rng(a.seed)
    # Readings are correlated as a kiln's are: fuel and air temperature move together.
    mix = np.eye(6)
    mix[1, 0] = 0.5
    mix[2, 1] = 0.3
    x = rng.standard_normal((a.rows, 6)) @ mix.T
    x /= x.std(axis=0)
    y = plant(x) + a.noise * rng.standard_normal(a.rows)
    np.savetxt(a.out, np.column_stack([x, y]), delimiter=",", header=",".join(COLUMNS), comments="",
               fmt="%.10g")
    print(f"{a.out}: {a.rows} rows, free lime mean {y.mean():.3f} std {y.std():.3f}")


if __name__ == "__main__":
    main()
