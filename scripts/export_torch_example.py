#!/usr/bin/python3
"""Write a plaudit run directory from a PyTorch training loop.

The recipe is the two functions between the `recipe` markers: `start_run` writes run.json
(from the module's own layer names) and data.npz; `save_snapshot` writes one
snapshots/step-N.npz from the state_dict (via NumPy, as step-N.npz.tmp renamed into place)
and appends the loss to scalars.jsonl. Call `save_snapshot` before the optimizer step, so the
logged loss belongs to the saved weights. torch.nn.Linear computes W a + b: the contract's
`standard` parameterization with `out_in` weights (shared/run-format.md, sections 2 and 4).

The scenario (invented for this example): a greenhouse logs four standardised readings per
hour (light, air temperature, CO2 and vent opening) and a 1-hidden-layer tanh network
predicts the leaf-surface humidity a sensor will read next. The target is made up by
`leaf_humidity` below.

Usage: /usr/bin/python3 scripts/export_torch_example.py OUT [--steps 400] [--save-every 40]
(OUT: a new or empty directory.)
"""
import argparse
import json
import os
import pathlib

import numpy as np
import torch

# --- recipe: a plaudit run directory from a torch.nn.Sequential --------------------------
ACTIVATIONS = {torch.nn.Tanh: "tanh", torch.nn.ReLU: "relu", torch.nn.Sigmoid: "sigmoid", torch.nn.GELU: "gelu"}


def start_run(run, model, x, y):
    run = pathlib.Path(run)
    (run / "snapshots").mkdir(parents=True, exist_ok=True)
    mods, layers = list(model.named_children()), []
    for i, (name, m) in enumerate(mods):
        if isinstance(m, torch.nn.Linear):  # the module after a Linear, if any, is its activation
            after = type(mods[i + 1][1]) if i + 1 < len(mods) else None
            layers.append({"weight": f"{name}.weight", "activation": ACTIVATIONS.get(after, "identity"),
                           **({"bias": f"{name}.bias"} if m.bias is not None else {})})
    np.savez(run / "data.npz", x=x.numpy(), y=y.numpy())
    manifest = {"format": "plaudit-run/1", "parameterization": "standard", "loss": "squared",
                "weight_layout": "out_in", "layers": layers}
    (run / "run.json.tmp").write_text(json.dumps(manifest, indent=2))
    os.replace(run / "run.json.tmp", run / "run.json")
    (run / "scalars.jsonl").write_text("")  # save_snapshot appends


def save_snapshot(run, model, step, loss):
    path = pathlib.Path(run) / "snapshots" / f"step-{step}.npz"
    with open(f"{path}.tmp", "wb") as f:  # a file object: np.savez would append .npz to a name
        np.savez(f, **{k: v.detach().cpu().numpy() for k, v in model.state_dict().items()})
    os.replace(f"{path}.tmp", path)
    with open(pathlib.Path(run) / "scalars.jsonl", "a") as f:
        f.write(json.dumps({"step": step, "loss": loss}) + "\n")
# --- end of recipe -------------------------------------------------------------------------


def leaf_humidity(x):
    light, temperature, co2, vent = x.unbind(dim=1)
    return torch.tanh(0.7 * temperature - 0.9 * vent) + 0.2 * light * co2


def main():
    p = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    p.add_argument("out", type=pathlib.Path)
    p.add_argument("--steps", type=int, default=400)
    p.add_argument("--save-every", type=int, default=40)
    p.add_argument("--lr", type=float, default=0.2)
    p.add_argument("--seed", type=int, default=3)
    a = p.parse_args()

    torch.manual_seed(a.seed)
    torch.set_num_threads(1)
    x = torch.randn(256, 4)
    y = (leaf_humidity(x) + 0.05 * torch.randn(256)).unsqueeze(1)
    model = torch.nn.Sequential(torch.nn.Linear(4, 32), torch.nn.Tanh(), torch.nn.Linear(32, 1))
    opt = torch.optim.SGD(model.parameters(), lr=a.lr)

    start_run(a.out, model, x, y)
    for step in range(a.steps + 1):
        # The contract's squared loss is mean(0.5 * ||out - y||^2): half of MSELoss here.
        loss = 0.5 * ((model(x) - y) ** 2).sum(dim=1).mean()
        if step % a.save_every == 0 or step == a.steps:
            save_snapshot(a.out, model, step, loss.item())
        if step < a.steps:
            opt.zero_grad()
            loss.backward()
            opt.step()
    print(f"{a.out}: {a.steps} steps, final loss {loss.item():.6g}")


if __name__ == "__main__":
    main()
