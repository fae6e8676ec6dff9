#!/usr/bin/python3
"""Writes the torch reference fixtures for package nn (stria/nn).

Run from the repository root:  /usr/bin/python3 testdata/nn/gen_nn.py
Outputs (JSON, float64 written with repr, so every value round-trips exactly):
  testdata/nn/conv.json   conv1d forward and all gradients, zero/circular/valid borders
  testdata/nn/net.json    conv->relu->conv->relu->flatten->linear->activation, loss and all gradients
  testdata/nn/adam.json   10 steps of torch.optim.Adam (L2 weight decay) and torch.optim.AdamW

Borders follow package nn: "same" padding pads (K-1)//2 on the left and the rest on
the right (explicit F.pad, mode 'constant' for zero and 'circular' for circular),
then conv1d without padding. Gradients come from autograd on loss = sum(y * dy)
for a random upstream gradient dy. All tensors are float64; the seed is fixed.
"""
import json
import platform
import sys

import numpy as np
import torch
import torch.nn.functional as F

torch.manual_seed(20261201)
DT = torch.float64


def versions():
    return {"python": platform.python_version(), "torch": torch.__version__, "numpy": np.__version__,
            "script": "testdata/nn/gen_nn.py"}


def flat(t):
    return [float(v) for v in t.detach().reshape(-1).tolist()]


def pad(x, k, border):
    if border == "valid":
        return x
    left = (k - 1) // 2
    right = k - 1 - left
    return F.pad(x, (left, right), mode="constant" if border == "zero" else "circular")


def conv_case(name, rows, cin, cout, length, k, stride, border):
    x = torch.randn(rows, cin, length, dtype=DT, requires_grad=True)
    w = (torch.randn(cout, cin, k, dtype=DT) / (cin * k) ** 0.5).requires_grad_()
    b = torch.randn(cout, dtype=DT, requires_grad=True)
    y = F.conv1d(pad(x, k, border), w, b, stride=stride)
    dy = torch.randn_like(y)
    (y * dy).sum().backward()
    return {"name": name, "rows": rows, "in": cin, "out": cout, "length": length, "k": k,
            "stride": stride, "border": border, "outlen": y.shape[2],
            "x": flat(x), "w": flat(w), "b": flat(b), "y": flat(y), "dy": flat(dy),
            "dx": flat(x.grad), "dw": flat(w.grad), "db": flat(b.grad)}


def same_padding_check():
    """torch's own padding='same' (stride 1) against our explicit asymmetric pad, for odd and even K."""
    out = {}
    for k in (2, 3, 8, 9):
        x = torch.randn(2, 3, 17, dtype=DT)
        w = torch.randn(4, 3, k, dtype=DT)
        a = F.conv1d(x, w, padding="same")
        b = F.conv1d(pad(x, k, "zero"), w)
        out["K%d" % k] = bool(a.shape == b.shape and torch.allclose(a, b, rtol=0, atol=1e-12))
    return out


def conv_cases():
    return [
        conv_case("K3 S1 zero In1", 3, 1, 2, 11, 3, 1, "zero"),
        conv_case("K8 S1 zero In3", 2, 3, 2, 13, 8, 1, "zero"),
        conv_case("K8 S1 circular In1", 2, 1, 3, 12, 8, 1, "circular"),
        conv_case("K3 S2 circular In3", 2, 3, 2, 11, 3, 2, "circular"),
        conv_case("K8 S2 zero In1", 2, 1, 2, 15, 8, 2, "zero"),
        conv_case("K9 S1 circular In1 L60", 2, 1, 2, 60, 9, 1, "circular"),
        conv_case("K9 S10 zero In1 L60", 2, 1, 2, 60, 9, 10, "zero"),
        conv_case("K9 S10 circular In3 L60", 2, 3, 2, 60, 9, 10, "circular"),
        conv_case("K8 S10 circular In1 L37", 2, 1, 2, 37, 8, 10, "circular"),
        conv_case("K9 S2 valid In3", 2, 3, 2, 20, 9, 2, "valid"),
        conv_case("K3 S10 valid In1", 2, 1, 2, 25, 3, 10, "valid"),
        conv_case("K8 S1 valid In1", 2, 1, 2, 8, 8, 1, "valid"),
    ]


def net_case(name, rows, cin, length, convs, neurons, act, loss, onehot):
    layers = []
    c, l = cin, length
    for (out, k, stride, border) in convs:
        w = (torch.rand(out, c, k, dtype=DT) * 2 - 1) / (c * k) ** 0.5
        b = (torch.rand(out, dtype=DT) * 2 - 1) / (c * k) ** 0.5 + 0.1
        layers.append((w.requires_grad_(), b.requires_grad_(), k, stride, border))
        lp = l if border == "valid" else l + k - 1
        c, l = out, (lp - k) // stride + 1
    feat = c * l
    rw = ((torch.rand(neurons, feat, dtype=DT) * 2 - 1) / feat ** 0.5).requires_grad_()
    rb = (torch.rand(neurons, dtype=DT) * 2 - 1).requires_grad_()
    if onehot:
        x = torch.zeros(rows, cin, length, dtype=DT)
        for r in range(rows):
            x[r, 0, (r * 5) % length] = 1.0
    else:
        x = torch.randn(rows, cin, length, dtype=DT)
    h = x
    for (w, b, k, stride, border) in layers:
        h = F.relu(F.conv1d(pad(h, k, border), w, b, stride=stride))
    hf = h.flatten(1)
    z = F.linear(hf, rw, rb)
    if act == "softplus":
        pred = F.softplus(z)
    elif act == "exp":
        pred = torch.exp(z)
    else:
        pred = z
    target = torch.rand(rows, neurons, dtype=DT) * 3
    weight = torch.randint(1, 9, (rows,)).to(DT)
    if loss == "mse":
        el = F.mse_loss(pred, target, reduction="none")
    else:
        el = F.poisson_nll_loss(pred, target, log_input=False, full=False, eps=1e-8, reduction="none")
    L = (weight[:, None] * el).sum() / (weight.sum() * neurons)
    pred.retain_grad()
    L.backward()
    params, grads = [], []
    for (w, b, _, _, _) in layers:
        params += flat(w) + flat(b)
        grads += flat(w.grad) + flat(b.grad)
    params += flat(rw) + flat(rb)
    grads += flat(rw.grad) + flat(rb.grad)
    return {"name": name, "rows": rows, "in": cin, "length": length,
            "convs": [{"out": o, "k": k, "stride": s, "border": bd} for (o, k, s, bd) in convs],
            "neurons": neurons, "output": act, "loss": loss, "features": feat,
            "params": params, "x": flat(x), "target": flat(target), "weight": flat(weight),
            "features_out": flat(hf), "pred": flat(pred), "loss_value": float(L),
            "dpred": flat(pred.grad), "grads": grads}


def net_cases():
    two = [(3, 5, 1, "circular"), (4, 4, 2, "zero")]
    return [
        net_case("onehot softplus mse", 7, 1, 12, two, 5, "softplus", "mse", True),
        net_case("onehot softplus poisson", 7, 1, 12, two, 5, "softplus", "poisson", True),
        net_case("onehot exp poisson", 6, 1, 12, two, 9, "exp", "poisson", True),
        net_case("dense exp mse", 5, 3, 10, [(2, 3, 2, "zero"), (3, 2, 1, "valid")], 4, "exp", "mse", False),
        net_case("dense identity mse", 5, 2, 9, [(3, 4, 1, "zero"), (2, 3, 3, "circular")], 6, "identity", "mse", False),
    ]


def adam_case(name, decoupled, lr, betas, eps, wd):
    a = torch.tensor([0.5, 2.0, 1.0, 0.25, 4.0], dtype=DT)
    c = torch.tensor([1.0, -1.0, 0.5, 3.0, 0.0], dtype=DT)
    theta0 = torch.tensor([0.0, 1.0, -2.0, 0.5, 1.5], dtype=DT)
    theta = theta0.clone().requires_grad_()
    cls = torch.optim.AdamW if decoupled else torch.optim.Adam
    opt = cls([theta], lr=lr, betas=betas, eps=eps, weight_decay=wd)
    steps, grads = [], []
    for _ in range(10):
        opt.zero_grad()
        loss = 0.5 * (a * (theta - c) ** 2).sum()
        loss.backward()
        grads.append(flat(theta.grad))
        opt.step()
        steps.append(flat(theta))
    return {"name": name, "decoupled": decoupled, "lr": lr, "beta1": betas[0], "beta2": betas[1],
            "eps": eps, "weight_decay": wd, "a": flat(a), "c": flat(c), "theta0": flat(theta0),
            "grads": grads, "params": steps,
            "loss": "0.5*sum(a*(theta-c)^2), gradient a*(theta-c)"}


def adam_cases():
    return [
        adam_case("Adam defaults", False, 1e-3, (0.9, 0.999), 1e-8, 0.0),
        adam_case("Adam L2 0.1", False, 0.05, (0.9, 0.999), 1e-8, 0.1),
        adam_case("AdamW 0.1", True, 0.05, (0.9, 0.999), 1e-8, 0.1),
        adam_case("AdamW 0.5 betas 0.8 0.99 eps 1e-6", True, 0.1, (0.8, 0.99), 1e-6, 0.5),
    ]


def write(path, cases, **extra):
    with open(path, "w") as f:
        json.dump(dict({"versions": versions(), "cases": cases}, **extra), f, separators=(",", ":"))
        f.write("\n")


if __name__ == "__main__":
    out = sys.argv[1] if len(sys.argv) > 1 else "testdata/nn"
    write(out + "/conv.json", conv_cases(), same_padding_matches=same_padding_check())
    write(out + "/net.json", net_cases())
    write(out + "/adam.json", adam_cases())
