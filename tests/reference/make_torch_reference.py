#!/usr/bin/python3
"""Loss and gradient references for the network of the run-directory contract.

Tool: PyTorch autograd (torch 1.13, float64) for the loss and every parameter gradient;
NumPy for the constant-predictor baseline loss. The forward pass is written out from the
contract (../../shared/run-format.md, section 4), not taken from plaudit:

    a_0 = x,  z_l = m_l * W_l a_{l-1} + b_l,  a_l = s_l(z_l),  output = a_L
    standard: m_l = 1;  mean-field: m_1 = 1, m_l = 1 / n_{l-1} for l >= 2
    losses averaged over the N rows: squared 0.5*||o - y||^2, cross-entropy
    F.cross_entropy(o, label), logistic F.binary_cross_entropy_with_logits(o, y)

Each case becomes a contract run directory under tests/fixtures/torch/<case>/ holding
run.json, data.npz (x, y), snapshots/step-0.npz (the parameters) and expected.npz with
`loss`, `baseline_loss` and `grad/<array name>` (in the array's stored shape) for every array.

Run: /usr/bin/python3 tests/reference/make_torch_reference.py
"""
import json
import pathlib
import shutil

import numpy as np
import torch
import torch.nn.functional as F

OUT = pathlib.Path(__file__).resolve().parent.parent / "fixtures" / "torch"
ROWS = 16
INPUT_DIM = 3
HIDDEN = (5, 4)
OUTPUTS = {"squared": 2, "cross-entropy": 3, "logistic": 1}
ACTIVATIONS = ("identity", "relu", "leaky_relu", "tanh", "sigmoid", "softplus", "gelu")
PARAMETERIZATIONS = ("mean-field", "standard")


def activate(name, z):
    if name == "identity":
        return z
    if name == "relu":
        return torch.relu(z)
    if name == "leaky_relu":
        return F.leaky_relu(z, negative_slope=0.01)
    if name == "tanh":
        return torch.tanh(z)
    if name == "sigmoid":
        return torch.sigmoid(z)
    if name == "softplus":
        # beta = 1; a threshold far above any z here keeps the exact log(1 + exp(z)).
        return F.softplus(z, beta=1.0, threshold=1000.0)
    if name == "gelu":
        return F.gelu(z, approximate="none")  # exact erf form
    raise ValueError(name)


def loss_of(loss, out, y):
    if loss == "squared":
        return 0.5 * ((out - y) ** 2).sum(dim=1).mean()
    if loss == "cross-entropy":
        return F.cross_entropy(out, y.long(), reduction="mean")
    if loss == "logistic":
        return F.binary_cross_entropy_with_logits(out.reshape(-1), y.reshape(-1), reduction="mean")
    raise ValueError(loss)


def baseline_loss(loss, y):
    """Loss of the best constant predictor, from its closed form (NumPy)."""
    y = np.asarray(y, dtype=np.float64)
    if loss == "squared":
        return 0.5 * float(np.sum(np.var(y.reshape(len(y), -1), axis=0)))
    p = np.bincount(y.reshape(-1).astype(np.int64)) / len(y)
    p = p[p > 0]
    return float(-np.sum(p * np.log(p)))  # class entropy; the binary case is logistic's


def make_data(loss, rng):
    x = rng.normal(size=(ROWS, INPUT_DIM))
    k = OUTPUTS[loss]
    if loss == "squared":
        y = rng.normal(size=(ROWS, k))
    elif loss == "cross-entropy":
        y = np.arange(ROWS, dtype=np.int64) % k  # every class present
        rng.shuffle(y)
    else:
        y = (rng.random(ROWS) < 0.4).astype(np.float64)
        y[:2] = (0.0, 1.0)  # both outcomes present
    return x, y


def case_layers(widths, activation, bias_flags):
    names = [f"fc{i + 1}" for i in range(len(widths) - 2)] + ["head"]
    layers = []
    for i, name in enumerate(names):
        spec = {"weight": f"{name}.weight",
                "activation": activation if i + 1 < len(names) else "identity"}
        if bias_flags[i]:
            spec["bias"] = f"{name}.bias"
        layers.append(spec)
    return layers


def multipliers(parameterization, widths, layers):
    m = []
    for l in range(len(layers)):
        default = 1.0 if parameterization == "standard" or l == 0 else 1.0 / widths[l]
        m.append(layers[l].get("multiplier", default))
    return m


def build_case(name, *, activation, loss, parameterization, seed, layout="out_in",
               bias_flags=(True, True, True), multiplier=None, y_shape=None):
    rng = np.random.default_rng(seed)
    widths = (INPUT_DIM,) + HIDDEN + (OUTPUTS[loss],)
    layers = case_layers(widths, activation, bias_flags)
    if multiplier is not None:
        layer_index, value = multiplier
        layers[layer_index]["multiplier"] = value
    m = multipliers(parameterization, widths, layers)
    x, y = make_data(loss, rng)
    if y_shape == "column":
        y = y.reshape(-1, 1)

    params = []
    for l, spec in enumerate(layers):
        # Mean-field layers average over their inputs, so their weights are O(1), not O(1/sqrt(n)).
        scale = 1.0 if m[l] != 1.0 else 1.0 / np.sqrt(widths[l])
        w = torch.tensor(rng.normal(size=(widths[l + 1], widths[l])) * scale * 1.5, requires_grad=True)
        b = torch.tensor(rng.normal(size=widths[l + 1]) * 0.5, requires_grad=True) if "bias" in spec else None
        params.append((w, b))

    a = torch.tensor(x)
    for l, spec in enumerate(layers):
        w, b = params[l]
        z = m[l] * (a @ w.T)
        if b is not None:
            z = z + b
        a = activate(spec["activation"], z)
    target = torch.tensor(y, dtype=torch.float64)
    total = loss_of(loss, a, target)
    total.backward()

    def stored(t):
        arr = t.detach().numpy().copy()
        return arr.T.copy() if (layout == "in_out" and arr.ndim == 2) else arr

    snapshot, expected = {}, {"loss": np.array(total.item()), "baseline_loss": np.array(baseline_loss(loss, y))}
    for spec, (w, b) in zip(layers, params):
        snapshot[spec["weight"]] = stored(w)
        expected["grad/" + spec["weight"]] = stored(w.grad)
        if b is not None:
            snapshot[spec["bias"]] = b.detach().numpy().copy()
            expected["grad/" + spec["bias"]] = b.grad.numpy().copy()

    manifest = {
        "format": "plaudit-run/1",
        "parameterization": parameterization,
        "loss": loss,
        "weight_layout": layout,
        "layers": layers,
        "data": "data.npz",
        "notes": "reference case from tests/reference/make_torch_reference.py",
    }
    root = OUT / name
    (root / "snapshots").mkdir(parents=True)
    (root / "run.json").write_text(json.dumps(manifest, indent=2) + "\n")
    np.savez_compressed(root / "data.npz", x=x, y=y)
    np.savez_compressed(root / "snapshots" / "step-0.npz", **snapshot)
    np.savez_compressed(root / "expected.npz", **expected)
    return name


def main():
    if OUT.exists():
        shutil.rmtree(OUT)
    OUT.mkdir(parents=True)
    cases = []
    seed = 100
    for parameterization in PARAMETERIZATIONS:
        for loss in OUTPUTS:
            for activation in ACTIVATIONS:
                seed += 1
                short = "mf" if parameterization == "mean-field" else "std"
                cases.append(build_case(f"{short}-{loss}-{activation}", activation=activation, loss=loss,
                                        parameterization=parameterization, seed=seed,
                                        y_shape="column" if (loss == "logistic" and short == "mf") else None))
    # Layout, multiplier and bias variations on top of the grid.
    cases.append(build_case("std-squared-tanh-in_out", activation="tanh", loss="squared",
                            parameterization="standard", seed=901, layout="in_out"))
    cases.append(build_case("mf-cross-entropy-gelu-in_out", activation="gelu", loss="cross-entropy",
                            parameterization="mean-field", seed=902, layout="in_out"))
    cases.append(build_case("mf-squared-softplus-multiplier", activation="softplus", loss="squared",
                            parameterization="mean-field", seed=903, multiplier=(1, 0.35)))
    cases.append(build_case("std-logistic-sigmoid-multiplier-nobias", activation="sigmoid", loss="logistic",
                            parameterization="standard", seed=904, multiplier=(2, 2.5),
                            bias_flags=(True, False, False)))
    (OUT / "cases.txt").write_text("\n".join(cases) + "\n")
    total = sum(p.stat().st_size for p in OUT.rglob("*") if p.is_file())
    print(f"wrote {len(cases)} cases, {total} bytes, to {OUT}")


if __name__ == "__main__":
    torch.set_default_dtype(torch.float64)
    main()
