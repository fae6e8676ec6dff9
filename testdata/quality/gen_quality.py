#!/usr/bin/python3
"""Reference for stria's quality benchmark (train/quality_test.go).

Trains the shared-filter encoder in PyTorch, the way a practitioner would
with a general deep-learning framework, on the data and split that stria's
benchmark writes, and records the share of the gap between the training
condition means and the oracle that it closes on the test trials.

    STRIA_QUALITY_OUT=/tmp/quality go test ./train -run TestWriteQualityData
    /usr/bin/python3 testdata/quality/gen_quality.py /tmp/quality > testdata/quality/reference.json

Model and objective (the same as stria's default encoder): one-hot bin ->
Conv1d(1, 8, 9, circular "same" padding) -> ReLU -> flatten -> Linear(480, N),
MSE on z-scored responses (stria's z-scoring, from the training and
validation trials) + lambda/(2N) * ||readout weights||^2 with lambda = 1.
Training: Adam (lr 1e-3, torch defaults otherwise), mini-batches of 256
shuffled training trials, early stopping on the validation loss with
patience 20 (best weights kept), at most 2000 epochs, torch.manual_seed(0).
"""
import json
import os
import sys

import numpy as np
import torch

d = sys.argv[1]
y = np.load(os.path.join(d, "responses.npy")).astype(np.float64)
cond = np.load(os.path.join(d, "condition.npy")).astype(np.int64)
oracle = np.load(os.path.join(d, "oracle_means.npy"))
mu = np.load(os.path.join(d, "norm_mean.npy"))
sd = np.load(os.path.join(d, "norm_scale.npy"))
split = json.load(open(os.path.join(d, "split.json")))
tr, va, te = (np.array(split[k]) for k in ("train", "validation", "test"))
B = split["bins"]
T, N = y.shape
z = (y - mu) / sd

torch.manual_seed(0)
torch.set_num_threads(2)
lam = 1.0


class Encoder(torch.nn.Module):
    def __init__(self):
        super().__init__()
        self.conv = torch.nn.Conv1d(1, 8, 9, padding=4, padding_mode="circular", dtype=torch.float64)
        self.read = torch.nn.Linear(8 * B, N, dtype=torch.float64)

    def forward(self, b):
        x = torch.nn.functional.one_hot(b, B).to(torch.float64).unsqueeze(1)
        return self.read(torch.relu(self.conv(x)).flatten(1))


net = Encoder()
opt = torch.optim.Adam(net.parameters(), lr=1e-3)
ct = torch.tensor(cond)
zt = torch.tensor(z)


def loss_of(idx, penalty):
    pred = net(ct[idx])
    l = ((pred - zt[idx]) ** 2).mean()
    if penalty:
        l = l + lam / (2 * N) * (net.read.weight ** 2).sum()
    return l


best, best_state, since = float("inf"), None, 0
gen = torch.Generator().manual_seed(0)
trt = torch.tensor(tr)
for epoch in range(2000):
    perm = trt[torch.randperm(len(trt), generator=gen)]
    for lo in range(0, len(perm), 256):
        opt.zero_grad()
        loss_of(perm[lo:lo + 256], True).backward()
        opt.step()
    with torch.no_grad():
        v = loss_of(torch.tensor(va), False).item()
    if v < best:
        best, since = v, 0
        best_state = {k: t.clone() for k, t in net.state_dict().items()}
    else:
        since += 1
        if since >= 20:
            break
net.load_state_dict(best_state)
with torch.no_grad():
    curves = net(torch.arange(B)).numpy() * sd + mu  # B x N, recording units


def mean_r2(pc):
    yt = y[te]
    res = ((yt - pc[cond[te]]) ** 2).sum(0)
    tot = ((yt - yt.mean(0)) ** 2).sum(0)
    ok = tot > 0
    return float(np.mean(1 - res[ok] / tot[ok]))


fit = np.concatenate([tr, va])
cm = np.zeros((B, N))
for b in range(B):
    cm[b] = y[fit[cond[fit] == b]].mean(0)
r2, r2cm, r2or = mean_r2(curves), mean_r2(cm), mean_r2(oracle)
json.dump({
    "responses_sha256": split["responses_sha256"],
    "gap_share": (r2 - r2cm) / (r2or - r2cm),
    "mean_r2": r2,
    "mean_r2_condmean": r2cm,
    "mean_r2_oracle": r2or,
    "best_epoch": epoch + 1 - since,
    "framework": "torch " + torch.__version__ + ", numpy " + np.__version__,
    "settings": "Adam lr 1e-3, batch 256, patience 20, max 2000 epochs, readout L2 lambda 1 (lambda/(2N) ||W||^2), float64, seed 0",
}, sys.stdout, indent=1)
print()
