#!/usr/bin/python3
"""Write a plaudit run directory from a training loop that uses NumPy only.

The scenario (invented for this example): a bakery oven logs three readings per batch of
bread (dough hydration, oven humidity and proofing time, each standardised) and we fit the
crust browning score the quality panel gives. The score is made up by `browning_score` below.

The network is a 2-layer tanh MLP in the mean-field parameterization of the run-directory
contract (shared/run-format.md, section 4):

    out = (1 / H) * W2 tanh(W1 x + b1) + b2,      H hidden neurons

trained by full-batch gradient descent on the squared loss mean(0.5 * (out - y)^2). Under
mean-field each parameter's gradient is multiplied by H (the 1 / (m_l * m_{l+1}) factor of
the contract; 1 for the output bias) so that every weight moves by O(1) whatever H is.

Output: OUT/run.json, OUT/data.npz, OUT/snapshots/step-N.npz (written as step-N.npz.tmp and
renamed, so a live reader never sees half a file), OUT/scalars.jsonl (one line per snapshot,
flushed as it is written). Audit it with `plaudit audit OUT`, or follow it while it is being
written with `plaudit watch OUT`.

Usage: /usr/bin/python3 scripts/export_numpy_example.py OUT [--steps 600] [--save-every 50]
       [--hidden 16] [--lr 0.5] [--rows 256] [--seed 7]
"""
import argparse
import json
import os
import pathlib

import numpy as np


def browning_score(x):
    """The panel's score as a smooth made-up function of the three readings."""
    hydration, humidity, proofing = x[:, 0], x[:, 1], x[:, 2]
    return np.tanh(0.8 * proofing - 0.5 * humidity) + 0.3 * hydration * humidity


def write_atomically(path, write):
    """Write through `path.tmp`, then rename: readers see the old file or the whole new one."""
    tmp = pathlib.Path(f"{path}.tmp")
    with open(tmp, "wb") as f:
        write(f)
    os.replace(tmp, path)


def forward(params, x, hidden):
    a1 = np.tanh(x @ params["fc1.weight"].T + params["fc1.bias"])
    out = (a1 @ params["head.weight"].T) / hidden + params["head.bias"]
    return a1, out


def loss_and_grads(params, x, y, hidden):
    """Squared loss averaged over rows, and its raw gradients (backpropagation by hand)."""
    n = x.shape[0]
    a1, out = forward(params, x, hidden)
    r = out - y                                   # d loss / d out, times n
    loss = float(np.mean(0.5 * np.sum(r * r, axis=1)))
    g_out = r / n
    grads = {
        "head.weight": g_out.T @ a1 / hidden,
        "head.bias": g_out.sum(axis=0),
    }
    g_z1 = (g_out @ params["head.weight"] / hidden) * (1.0 - a1 * a1)
    grads["fc1.weight"] = g_z1.T @ x
    grads["fc1.bias"] = g_z1.sum(axis=0)
    return loss, grads


def main():
    p = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    p.add_argument("out", type=pathlib.Path)
    p.add_argument("--steps", type=int, default=600)
    p.add_argument("--save-every", type=int, default=50)
    p.add_argument("--hidden", type=int, default=16)
    p.add_argument("--lr", type=float, default=0.5)
    p.add_argument("--rows", type=int, default=256)
    p.add_argument("--seed", type=int, default=7)
    a = p.parse_args()

    rng = np.random.default_rng(a.seed)
    x = rng.normal(size=(a.rows, 3))
    y = (browning_score(x) + 0.05 * rng.normal(size=a.rows)).reshape(-1, 1)
    h = a.hidden
    params = {
        "fc1.weight": rng.normal(size=(h, 3)),
        "fc1.bias": rng.normal(size=h) * 0.5,
        "head.weight": rng.normal(size=(1, h)),
        "head.bias": np.zeros(1),
    }
    # Mean-field gradient scale 1 / (m_l * m_{l+1}) per parameter (contract, section 4).
    scale = {"fc1.weight": h, "fc1.bias": h, "head.weight": h, "head.bias": 1.0}

    run = a.out
    (run / "snapshots").mkdir(parents=True, exist_ok=True)
    write_atomically(run / "data.npz", lambda f: np.savez(f, x=x, y=y))
    manifest = {
        "format": "plaudit-run/1",
        "parameterization": "mean-field",
        "loss": "squared",
        "weight_layout": "out_in",
        "layers": [
            {"weight": "fc1.weight", "bias": "fc1.bias", "activation": "tanh"},
            {"weight": "head.weight", "bias": "head.bias", "activation": "identity"},
        ],
        "data": "data.npz",
        "notes": "bakery oven browning score; scripts/export_numpy_example.py",
    }
    write_atomically(run / "run.json", lambda f: f.write((json.dumps(manifest, indent=2) + "\n").encode()))

    with open(run / "scalars.jsonl", "w") as log:
        for step in range(a.steps + 1):
            loss, grads = loss_and_grads(params, x, y, h)
            if step % a.save_every == 0 or step == a.steps:
                # The snapshot holds the parameters after `step` updates; the logged loss is
                # the full-batch loss at exactly those parameters.
                snap = run / "snapshots" / f"step-{step}.npz"
                write_atomically(snap, lambda f: np.savez(f, **params))
                norm = float(np.sqrt(sum(np.sum((scale[k] * g) ** 2) for k, g in grads.items())))
                log.write(json.dumps({"step": step, "loss": loss, "grad_norm": norm}) + "\n")
                log.flush()
            if step < a.steps:
                for k, g in grads.items():
                    params[k] = params[k] - a.lr * scale[k] * g
    print(f"{run}: {a.steps} steps, final loss {loss:.6g}")


if __name__ == "__main__":
    main()
