#!/usr/bin/python3
"""Reference values for check `layer-degeneracy`: neuron correlations, effective rank and the
shares of a weight change.

Tools: NumPy only. numpy.corrcoef (columns as variables) gives the correlation matrix of the
varying neurons, numpy.linalg.eigvalsh of numpy.cov(bias=True) the covariance spectrum whose
entropy is the effective rank (Roy & Vetterli 2007), and numpy.linalg.lstsq projects a weight
change onto the constant matrices, the matrices with equal rows and those with equal columns
(a least-squares fit, independent of the closed forms in src/checks/layer_degeneracy.cpp).
Writes tests/fixtures/degeneracy.json.

Run: /usr/bin/python3 tests/reference/make_degeneracy_reference.py
"""
import json
import pathlib

import numpy as np

OUT = pathlib.Path(__file__).resolve().parent.parent / "fixtures" / "degeneracy.json"


def activation_case(name, a):
    sd = a.std(axis=0)
    varying = sd > 1e-12 * np.abs(a).max(axis=0)
    r = np.corrcoef(a[:, varying], rowvar=False)
    k = r.shape[0]
    off = ~np.eye(k, dtype=bool)
    lam = np.clip(np.linalg.eigvalsh(np.cov(a, rowvar=False, bias=True)), 0.0, None)
    p = lam / lam.sum()
    p = p[p > 0]
    return {
        "name": name,
        "a": a.tolist(),
        "varying": int(varying.sum()),
        "mean_abs_corr": float(np.abs(r[off]).mean()),
        "mean_corr": float(r[off].mean()),
        "effective_rank": float(np.exp(-(p * np.log(p)).sum())),
        "top_share": float(lam.max() / lam.sum()),
    }


def share(delta, basis):
    """Share of ||delta||^2 carried by its least-squares fit in the span of `basis` matrices."""
    design = np.stack([b.ravel() for b in basis], axis=1)
    coef, *_ = np.linalg.lstsq(design, delta.ravel(), rcond=None)
    fit = design @ coef
    return float(fit @ fit / (delta.ravel() @ delta.ravel()))


def unit(shape, i, j=None):
    m = np.zeros(shape)
    if j is None:
        m[:, i] = 1.0  # equal rows: column i constant
    else:
        m[i, :] = 1.0  # equal columns: row i constant
    return m


def main():
    rng = np.random.default_rng(20240611)
    n, width = 300, 12
    # Three latent factors mixed into twelve neurons, plus noise: moderate correlations of both
    # signs. One neuron is constant (a dead unit) and must be left out of the correlations; one
    # rides on a large offset, which a one-pass sum-of-squares formula would lose to cancellation.
    factors = rng.standard_normal((n, 3))
    mixing = rng.standard_normal((3, width))
    a = np.tanh(factors @ mixing + 0.5 * rng.standard_normal((n, width)))
    a[:, 4] = 0.75
    a[:, 7] += 1.0e4
    mixed = activation_case("mixed", a)
    # One function up to sign and scale plus small noise: nearly degenerate.
    g = np.sin(rng.standard_normal(n) * 2.0)
    scales = rng.choice([-1.0, 1.0], width) * rng.uniform(0.5, 2.0, width)
    b = np.outer(g, scales) + 0.05 * rng.standard_normal((n, width))
    nearly_one = activation_case("nearly-one-function", b)

    rows, cols = 5, 7
    delta = 0.3 + np.outer(rng.standard_normal(rows), np.ones(cols)) * 0.2 \
        + rng.standard_normal((rows, cols)) * 0.1
    shares = {
        "delta": delta.tolist(),
        "translation": share(delta, [np.ones((rows, cols))]),
        "common_row": share(delta, [unit((rows, cols), i) for i in range(cols)]),
        "common_column": share(delta, [unit((rows, cols), i, 0) for i in range(rows)]),
    }
    doc = {"tool": "numpy " + np.__version__, "activations": [mixed, nearly_one], "shares": shares}
    OUT.parent.mkdir(parents=True, exist_ok=True)
    OUT.write_text(json.dumps(doc, indent=1) + "\n")
    print(f"wrote {OUT}")


if __name__ == "__main__":
    main()
