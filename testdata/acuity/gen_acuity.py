#!/usr/bin/python3
"""Write acuity_ref.json: a small synthetic population, five folds, and the
predictions and decision scores of scikit-learn's LinearDiscriminantAnalysis
(solver="lsqr", fixed shrinkage) for the Go tests of stria/eval/acuity.

The Go decoder shrinks the pooled within-condition covariance S towards its
diagonal, (1 - alpha) S + alpha diag(S). scikit-learn shrinks towards
tr(S)/N times the identity; on responses divided, per neuron, by their pooled
within-condition standard deviation (divisor: number of training trials) the
two are the same classifier. So each fold is fitted here on responses scaled
by that standard deviation, computed on the fold's training trials.

Run from the repository root:  /usr/bin/python3 testdata/acuity/gen_acuity.py
All inputs are synthetic and drawn from a seeded numpy generator.
"""
import json
import platform

import numpy as np
import sklearn
from sklearn.discriminant_analysis import LinearDiscriminantAnalysis

rng = np.random.default_rng(20261203)

# --- population: 30 neurons, 8 orientations (period 180), correlated noise ---
N, B, K = 30, 8, 5
period = 180.0
values = np.arange(B) * period / B
pref = rng.uniform(0, period, N)
base = rng.uniform(1, 3, N)
amp = rng.uniform(1, 4, N)
kappa = rng.uniform(0.5, 2.5, N)
counts = rng.integers(18, 36, B)  # unequal trials per condition
cond = np.repeat(np.arange(B), counts)
T = cond.size
mean = base[None, :] + amp[None, :] * np.exp(
    kappa[None, :] * (np.cos(2 * np.pi * (values[cond][:, None] - pref[None, :]) / period) - 1))
U = rng.normal(size=(N, 3))
corr = U @ U.T / 3 + np.eye(N)
d = 1 / np.sqrt(np.diag(corr))
corr = corr * d[:, None] * d[None, :]
sd = rng.uniform(1.2, 2.5, N)
cov = corr * sd[:, None] * sd[None, :]
noise = rng.multivariate_normal(np.zeros(N), cov, size=T)
y = (mean + noise).astype(np.float32)

# --- folds: within each condition, a random order dealt round-robin ---
fold = np.empty(T, dtype=int)
for b in range(B):
    idx = np.flatnonzero(cond == b)
    fold[rng.permutation(idx)] = np.arange(idx.size) % K

cases = []
for name, alpha, uniform in [
    ("alpha0", 0.0, False),
    ("alpha0.3", 0.3, False),
    ("alpha0.8", 0.8, False),
    ("alpha1_diagonal", 1.0, False),
    ("alpha0.5_uniform_prior", 0.5, True),
]:
    pred = np.full(T, -1)
    scores = np.zeros((T, B))
    for f in range(K):
        tr, te = fold != f, fold == f
        X = y[tr].astype(np.float64)
        yc = cond[tr]
        # Pooled within-condition variance, divisor = number of training trials.
        ss = np.zeros(N)
        for b in range(B):
            Xb = X[yc == b]
            ss += ((Xb - Xb.mean(axis=0)) ** 2).sum(axis=0)
        scale = np.sqrt(ss / X.shape[0])
        lda = LinearDiscriminantAnalysis(solver="lsqr", shrinkage=alpha).fit(X / scale, yc)
        Xt = y[te].astype(np.float64) / scale
        s = lda.decision_function(Xt)
        if uniform:
            # Drop the log prior from the scores. (Passing priors= would
            # also reweight the class covariances; stria keeps the pooled
            # covariance and drops only the prior term.)
            s = s - np.log(lda.priors_)[None, :]
            pred[te] = lda.classes_[np.argmax(s, axis=1)]
        else:
            pred[te] = lda.predict(Xt)
        scores[te] = s
    cases.append({
        "name": name, "shrinkage": alpha, "uniform_prior": uniform,
        "pred": pred.tolist(),
        "accuracy": float((pred == cond).mean()),
        "scores": scores.ravel().tolist(),
    })

out = {
    "generator": "testdata/acuity/gen_acuity.py",
    "versions": {"python": platform.python_version(), "numpy": np.__version__, "sklearn": sklearn.__version__},
    "neurons": N, "nbins": B, "period": period, "values": values.tolist(),
    "y": y.astype(np.float64).ravel().tolist(),
    "cond": cond.tolist(), "fold": fold.tolist(), "folds": K,
    "cases": cases,
}
with open("testdata/acuity/acuity_ref.json", "w") as fh:
    json.dump(out, fh, separators=(",", ":"))
    fh.write("\n")
