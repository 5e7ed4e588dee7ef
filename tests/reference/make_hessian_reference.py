#!/usr/bin/python3
"""Hessian references for the full-batch loss of the run-directory contract's network.

Tool: PyTorch (torch 1.13, float64): torch.autograd.functional.hessian of the loss as a
function of one flat vector of the chosen layers' parameters, and torch.linalg.eigvalsh for its
spectrum. The forward pass is written out from the contract (../../shared/run-format.md,
section 4), not taken from plaudit:

    a_0 = x,  z_l = m_l * W_l a_{l-1} + b_l,  a_l = s_l(z_l),  output = a_L
    standard: m_l = 1;  mean-field: m_1 = 1, m_l = 1 / n_{l-1} for l >= 2
    losses averaged over the N rows: squared 0.5*||o - y||^2, cross-entropy
    F.cross_entropy(o, label), logistic F.binary_cross_entropy_with_logits(o, y)

The Hessian is taken with respect to the stored parameters (the multipliers are constants of
the network). Flat order, as plaudit documents it (include/plaudit/model/hessian.h): chosen
layers ascending; within a layer the (n_out x n_in) weight in column-major order, i.e.
W.T.flatten(), then the bias if the layer has one.

Each case is tests/fixtures/hessian/<case>.json with the layers (weight as n_out rows of n_in,
bias or null, activation, multiplier, chosen), x, y, the loss value, the full Hessian in the flat
order, all eigenvalues ascending, and lambda_min / lambda_max.

One case is checked here against a closed form as well: at the origin of a two-layer mean-field
tanh network without output bias (every weight and bias zero) the loss is stationary and the
only nonzero second derivatives are d^2 L / (d a_j d (w_j, b_j)) = -(1/n) E[y (x, 1)], so the
spectrum is +-||E[y (x, 1)]|| / n, each n times, and zeros.

Run: /usr/bin/python3 tests/reference/make_hessian_reference.py
"""
import json
import pathlib

import numpy as np
import torch
import torch.nn.functional as F

OUT = pathlib.Path(__file__).resolve().parent.parent / "fixtures" / "hessian"


def activate(name, z):
    if name == "identity":
        return z
    if name == "tanh":
        return torch.tanh(z)
    if name == "sigmoid":
        return torch.sigmoid(z)
    if name == "softplus":
        return F.softplus(z, beta=1.0, threshold=1000.0)  # exact log(1 + exp(z)) at these z
    if name == "gelu":
        return F.gelu(z, approximate="none")
    raise ValueError(name)


def loss_of(loss, out, y):
    if loss == "squared":
        return 0.5 * ((out - y) ** 2).sum(dim=1).mean()
    if loss == "cross-entropy":
        return F.cross_entropy(out, y.reshape(-1).long(), reduction="mean")
    if loss == "logistic":
        return F.binary_cross_entropy_with_logits(out.reshape(-1), y.reshape(-1), reduction="mean")
    raise ValueError(loss)


def build_case(name, *, widths, activation, loss, parameterization, seed, rows=24, bias=None, chosen=None,
               zero=False):
    rng = np.random.default_rng(seed)
    depth = len(widths) - 1
    bias = bias if bias is not None else [True] * (depth - 1) + [False]
    chosen = chosen if chosen is not None else list(range(depth))
    mult = [1.0 if parameterization == "standard" or l == 0 else 1.0 / widths[l] for l in range(depth)]
    x = rng.normal(size=(rows, widths[0]))
    k = widths[-1]
    if loss == "squared":
        y = rng.normal(size=(rows, k)) + 0.8 * x[:, :1]  # a linear part, so E[x y] != 0
    elif loss == "cross-entropy":
        y = (np.arange(rows) % k).astype(np.float64).reshape(-1, 1)
        rng.shuffle(y)
    else:
        y = (rng.random(rows) < 0.4).astype(np.float64).reshape(-1, 1)
        y[:2, 0] = (0.0, 1.0)
    weights, biases = [], []
    for l in range(depth):
        scale = 1.0 if mult[l] != 1.0 else 1.0 / np.sqrt(widths[l])
        w = rng.normal(size=(widths[l + 1], widths[l])) * scale * 1.3
        b = rng.normal(size=widths[l + 1]) * 0.5 if bias[l] else None
        if zero:
            w = np.zeros_like(w)
            b = np.zeros_like(b) if b is not None else None
        weights.append(w)
        biases.append(b)

    xt = torch.tensor(x)
    yt = torch.tensor(y)
    sizes = []
    for l in chosen:
        sizes.append(weights[l].size + (biases[l].size if biases[l] is not None else 0))
    theta0 = []
    for l in chosen:
        theta0.append(weights[l].T.flatten())  # column-major of the n_out x n_in weight
        if biases[l] is not None:
            theta0.append(biases[l])
    theta0 = torch.tensor(np.concatenate(theta0))

    def full_loss(theta):
        ws = [torch.tensor(w) for w in weights]
        bs = [torch.tensor(b) if b is not None else None for b in biases]
        off = 0
        for l in chosen:
            n_out, n_in = weights[l].shape
            ws[l] = theta[off:off + n_out * n_in].reshape(n_in, n_out).T
            off += n_out * n_in
            if biases[l] is not None:
                bs[l] = theta[off:off + n_out]
                off += n_out
        a = xt
        for l in range(depth):
            z = mult[l] * (a @ ws[l].T)
            if bs[l] is not None:
                z = z + bs[l]
            a = activate(activation if l + 1 < depth else "identity", z)
        return loss_of(loss, a, yt)

    hess = torch.autograd.functional.hessian(full_loss, theta0)
    hess = 0.5 * (hess + hess.T)  # autograd's is symmetric to rounding; eigvalsh reads one triangle
    eig = torch.linalg.eigvalsh(hess)
    case = {
        "tool": f"torch {torch.__version__} autograd.functional.hessian, linalg.eigvalsh, float64",
        "loss": loss,
        "parameterization": parameterization,
        "layers": [{"weight": weights[l].tolist(),
                    "bias": biases[l].tolist() if biases[l] is not None else None,
                    "activation": activation if l + 1 < depth else "identity",
                    "multiplier": mult[l],
                    "chosen": l in chosen} for l in range(depth)],
        "x": x.tolist(),
        "y": y.tolist(),
        "loss_value": float(full_loss(theta0)),
        "parameters": int(theta0.numel()),
        "hessian": hess.tolist(),
        "eigenvalues": eig.tolist(),
        "lambda_min": float(eig[0]),
        "lambda_max": float(eig[-1]),
    }
    if zero:
        n = widths[1]
        c = np.concatenate([(x * y).mean(axis=0), [y.mean()]]) / n
        closed = float(np.linalg.norm(c))
        assert abs(case["lambda_min"] + closed) < 1e-12 and abs(case["lambda_max"] - closed) < 1e-12, (case, closed)
        case["closed_form_abs_eigenvalue"] = closed
    (OUT / f"{name}.json").write_text(json.dumps(case) + "\n")
    return name, case["parameters"], case["lambda_min"], case["lambda_max"]


def main():
    OUT.mkdir(parents=True, exist_ok=True)
    for old in OUT.glob("*.json"):
        old.unlink()
    cases = [
        build_case("mf-squared-tanh", widths=(3, 6, 1), activation="tanh", loss="squared",
                   parameterization="mean-field", seed=11),
        build_case("std-squared-softplus", widths=(3, 5, 4, 2), activation="softplus", loss="squared",
                   parameterization="standard", seed=12, bias=[True, True, True]),
        build_case("mf-squared-softplus", widths=(3, 5, 4, 1), activation="softplus", loss="squared",
                   parameterization="mean-field", seed=13),
        build_case("std-squared-tanh", widths=(4, 6, 1), activation="tanh", loss="squared",
                   parameterization="standard", seed=14),
        build_case("std-cross-entropy-tanh", widths=(3, 5, 3), activation="tanh", loss="cross-entropy",
                   parameterization="standard", seed=15, bias=[True, True]),
        build_case("mf-logistic-gelu-upper", widths=(3, 5, 4, 1), activation="gelu", loss="logistic",
                   parameterization="mean-field", seed=16, chosen=[1, 2]),
        build_case("std-squared-sigmoid-first", widths=(3, 4, 4, 1), activation="sigmoid", loss="squared",
                   parameterization="standard", seed=17, chosen=[0]),
        build_case("mf-squared-tanh-origin", widths=(3, 4, 1), activation="tanh", loss="squared",
                   parameterization="mean-field", seed=18, zero=True),
    ]
    for name, p, lo, hi in cases:
        print(f"{name}: {p} parameters, lambda_min {lo:.6g}, lambda_max {hi:.6g}")


if __name__ == "__main__":
    torch.set_default_dtype(torch.float64)
    main()
