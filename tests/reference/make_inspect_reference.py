#!/usr/bin/python3
"""Reference losses for `plaudit inspect`, computed by NumPy.

Tool: NumPy (float64). The forward pass and the loss are written out from the contract
(../../shared/run-format.md, section 4), not taken from plaudit:

    a_0 = x,  z_l = m_l * W_l a_{l-1} + b_l,  a_l = s_l(z_l),  output = a_L
    mean-field: m_1 = 1, m_l = 1 / n_{l-1} for l >= 2
    squared loss averaged over the N rows: mean of 0.5 * ||output - y||^2
    baseline L0: the same loss of the best constant predictor (the column means of y)

Writes tests/fixtures/inspect-run/, a contract run directory (run.json, data.npz,
snapshots/step-0.npz stored and snapshots/step-25.npz deflated, scalars.jsonl logging the two
losses), and tests/fixtures/inspect-run-expected.json with NumPy's losses, the baseline, the
multipliers and the parameter count. The network: 3 inputs -> 6 tanh -> 4 tanh -> 2 identity
outputs (no output bias). The step-25 weights are the step-0 weights plus a seeded
perturbation: the fixture only needs two different networks, not a real training run.

Run: /usr/bin/python3 tests/reference/make_inspect_reference.py
"""
import json
import pathlib
import shutil

import numpy as np

FIXTURES = pathlib.Path(__file__).resolve().parent.parent / "fixtures"
OUT = FIXTURES / "inspect-run"
EXPECTED = FIXTURES / "inspect-run-expected.json"
ROWS, INPUTS, HIDDEN, OUTPUTS = 40, 3, (6, 4), 2
LAYERS = [  # (weight, bias or None, activation)
    ("fc1.weight", "fc1.bias", "tanh"),
    ("fc2.weight", "fc2.bias", "tanh"),
    ("head.weight", None, "identity"),
]
STEPS = (0, 25)


def forward(params, x):
    a = x
    sizes = (INPUTS,) + HIDDEN + (OUTPUTS,)
    for l, (w, b, act) in enumerate(LAYERS):
        m = 1.0 if l == 0 else 1.0 / sizes[l]  # mean-field: 1 / n_{l-1} from the second layer on
        z = m * (a @ params[w].T)              # out_in layout: W is (n_l, n_{l-1})
        if b is not None:
            z = z + params[b]
        a = np.tanh(z) if act == "tanh" else z
    return a


def squared_loss(out, y):
    return float(np.mean(0.5 * np.sum((out - y) ** 2, axis=1)))


def main():
    rng = np.random.default_rng(20240611)
    x = rng.normal(size=(ROWS, INPUTS))
    y = np.stack([np.sin(x[:, 0]) + 0.5 * x[:, 1], np.cos(x[:, 2]) * x[:, 0]], axis=1)

    sizes = (INPUTS,) + HIDDEN + (OUTPUTS,)
    first = {}
    for l, (w, b, _) in enumerate(LAYERS):
        # O(1) weights: mean-field layers average over the previous layer's neurons.
        first[w] = rng.normal(size=(sizes[l + 1], sizes[l])) * (1.0 if l == 0 else 3.0)
        if b is not None:
            first[b] = rng.normal(size=sizes[l + 1]) * 0.5
    second = {k: v + 0.3 * rng.normal(size=v.shape) for k, v in first.items()}

    if OUT.exists():
        shutil.rmtree(OUT)
    (OUT / "snapshots").mkdir(parents=True)
    manifest = {
        "format": "plaudit-run/1",
        "parameterization": "mean-field",
        "loss": "squared",
        "weight_layout": "out_in",
        "layers": [
            {"weight": w, **({"bias": b} if b else {}), "activation": act} for w, b, act in LAYERS
        ],
        "data": "data.npz",
        "notes": "inspect fixture: written by tests/reference/make_inspect_reference.py (NumPy)",
    }
    (OUT / "run.json").write_text(json.dumps(manifest, indent=2) + "\n")
    np.savez(OUT / "data.npz", x=x, y=y)
    np.savez(OUT / "snapshots" / "step-0.npz", **first)
    np.savez_compressed(OUT / "snapshots" / "step-25.npz", **second)

    losses = {str(s): squared_loss(forward(p, x), y) for s, p in zip(STEPS, (first, second))}
    with open(OUT / "scalars.jsonl", "w") as f:
        for s in STEPS:
            f.write(json.dumps({"step": s, "loss": losses[str(s)]}) + "\n")

    baseline = squared_loss(np.broadcast_to(y.mean(axis=0), y.shape), y)
    expected = {
        "tool": f"numpy {np.__version__}, float64",
        "losses": losses,
        "baseline_loss": baseline,
        "multipliers": [1.0] + [1.0 / n for n in sizes[1:-1]],
        "parameters": int(sum(v.size for v in first.values())),
        "rows": ROWS,
        "dims": INPUTS,
    }
    EXPECTED.write_text(json.dumps(expected, indent=2) + "\n")
    print(f"wrote {OUT} and {EXPECTED}: losses {losses}, baseline {baseline}")


if __name__ == "__main__":
    main()
