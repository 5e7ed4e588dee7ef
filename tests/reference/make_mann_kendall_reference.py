#!/usr/bin/python3
"""Reference values for the Mann-Kendall test and least-squares line fits.

Tools: NumPy (numpy.polyfit with cov=True for the slope's standard error) and Python's
math.erfc for the normal tail. Mann-Kendall S, tie-corrected Var(S), z, p-values and
Kendall's tau-b are computed by brute force over all pairs, independently of the O(n log n)
counting in src/stats/mann_kendall.cpp. Writes tests/fixtures/mann_kendall.json.

Run: /usr/bin/python3 tests/reference/make_mann_kendall_reference.py
"""
import itertools
import json
import math
import pathlib

import numpy as np

OUT = pathlib.Path(__file__).resolve().parent.parent / "fixtures" / "mann_kendall.json"


def mann_kendall(x):
    x = [float(v) for v in x]
    n = len(x)
    s = 0
    for i in range(n):
        for j in range(i + 1, n):
            s += (x[j] > x[i]) - (x[j] < x[i])
    _, counts = np.unique(np.array(x), return_counts=True)
    ties = sum(int(t) * (int(t) - 1) * (2 * int(t) + 5) for t in counts)
    var_s = (n * (n - 1) * (2 * n + 5) - ties) / 18.0
    if s > 0 and var_s > 0:
        z = (s - 1) / math.sqrt(var_s)
    elif s < 0 and var_s > 0:
        z = (s + 1) / math.sqrt(var_s)
    else:
        z = 0.0
    # Kendall's tau-b of (time, x): time has no ties, so only pairs tied in x leave the
    # denominator.
    n0 = n * (n - 1) / 2
    tied_pairs = sum(
        1 for i in range(n) for j in range(i + 1, n) if x[i] == x[j])
    denom = math.sqrt(n0 * (n0 - tied_pairs))
    return {
        "n": n,
        "S": s,
        "var_s": var_s,
        "z": z,
        "p_two_sided": math.erfc(abs(z) / math.sqrt(2.0)),
        "p_decreasing": 0.5 * math.erfc(-z / math.sqrt(2.0)),
        "p_increasing": 0.5 * math.erfc(z / math.sqrt(2.0)),
        "tau": s / denom if denom > 0 else None,
    }


def exact_upper_tail(x):
    """P(S >= S_obs) over all orderings of distinct values: the exact null Gilbert tabulates."""
    s_obs = mann_kendall(x)["S"]
    perms = list(itertools.permutations(range(len(x))))
    hits = sum(1 for p in perms if mann_kendall(p)["S"] >= s_obs)
    return hits / len(perms)


def line_fit(x, y):
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    # polyfit's normal equations lose ~7 digits at x ~ 1e6, so fit on x - x[0]: slope and its
    # standard error do not change under the shift; the intercept is shifted back.
    x0 = x[0]
    coef, cov = np.polyfit(x - x0, y, 1, cov=True)
    slope, intercept = coef[0], coef[1] - coef[0] * x0
    se = math.sqrt(cov[0, 0])
    # Closed-form OLS as a cross-check of polyfit's covariance scaling (n - 2 dof).
    xm, ym = x.mean(), y.mean()
    sxx = ((x - xm) ** 2).sum()
    b = ((x - xm) * (y - ym)).sum() / sxx
    resid = y - (ym + b * (x - xm))
    s2 = (resid ** 2).sum() / (len(x) - 2)
    assert abs(b - slope) <= 1e-9 * max(1.0, abs(b))
    assert abs(math.sqrt(s2 / sxx) - se) <= 1e-9 * max(1e-300, se)
    return {"x": x.tolist(), "y": y.tolist(), "slope": float(slope),
            "intercept": float(intercept), "slope_se": se, "slope_t": float(slope) / se,
            "residual_variance": float(s2)}


def mann_kendall_cases(rng):
    cases = {
        # Gilbert (1987), Example 16.1 data (from memory).
        "gilbert_16_1": [10, 15, 14, 20],
        # "A Mann-Kendall Example (By Hand)", College of the Holy Cross: one tied pair.
        "holy_cross": [12.9, 14.8, 13.2, 15.7, 13.8, 15.6, 12.9, 11.0, 17.3, 15.9, 19.0,
                       18.3, 20.1, 21.7],
        # Several tie groups of different sizes, falling overall.
        "ties_falling": [5, 5, 4, 5, 3, 3, 3, 4, 2, 2, 1, 2, 1, 1, 1, 0],
        "all_tied": [2.5] * 6,
    }
    # A noisy decaying loss rounded to 2 decimals so that ties occur.
    t = np.arange(40)
    noisy = np.round(1.0 + 2.0 * np.exp(-t / 10.0) + 0.05 * rng.standard_normal(40), 2)
    cases["noisy_decay_rounded"] = noisy.tolist()
    out = {}
    for name, x in cases.items():
        entry = {"x": [float(v) for v in x]}
        entry.update(mann_kendall(x))
        out[name] = entry
    out["gilbert_16_1"]["exact_p_increasing"] = exact_upper_tail(cases["gilbert_16_1"])
    return out


def gradient_rebound(rng):
    """log sup of a gradient that falls 8.4 nats by step 700, then climbs over the last third
    (steps 800..1100); the fit is over the last max(3, ceil(n/3)) = 4 snapshots, as the
    gradient-decay check takes them."""
    steps = np.arange(0, 1200, 100, dtype=float)
    log_sup = np.where(steps <= 700, -0.012 * steps, -0.012 * 700 + 0.0015 * (steps - 700))
    log_sup = log_sup + 0.02 * rng.standard_normal(len(steps))
    tail = max(3, -(-len(steps) // 3))
    return {"steps": steps.tolist(), "log_sup": log_sup.tolist(),
            "rho": float(math.exp(log_sup[-1] - log_sup.max())),
            "tail": line_fit(steps[-tail:], log_sup[-tail:])}


def line_fit_cases():
    return {
        "uneven_x": line_fit([0, 1, 3, 7, 8, 15, 16], [2.0, 2.9, 5.2, 9.1, 9.8, 17.5, 18.1]),
        "large_steps": line_fit([1e6, 1e6 + 10, 1e6 + 30, 1e6 + 60],
                                [0.5, 0.47, 0.44, 0.35]),
    }


def main():
    rng = np.random.default_rng(20240611)
    fixture = {
        "generator": "tests/reference/make_mann_kendall_reference.py (NumPy %s)" % np.__version__,
        "mann_kendall": mann_kendall_cases(rng),
        "line_fit": line_fit_cases(),
        "gradient_rebound": gradient_rebound(rng),
    }
    OUT.parent.mkdir(parents=True, exist_ok=True)
    OUT.write_text(json.dumps(fixture, indent=1) + "\n")
    print("wrote", OUT)


if __name__ == "__main__":
    main()
