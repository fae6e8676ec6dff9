#!/usr/bin/python3
"""Write state_ref.json: reference values for the Go tests of stria/eval/state,
computed with numpy, scipy and scikit-learn on a small synthetic recording.

Run from the repository root:  /usr/bin/python3 testdata/state/gen_state.py
All inputs are synthetic and drawn from a seeded numpy generator; the file
records the library versions. The computations here are written from the
model's definition with general-purpose solvers (numpy lstsq, scikit-learn
LinearRegression / Ridge / r2_score, scipy least_squares), independently of
the Go code, which works from condition sums.
"""
import json
import platform

import numpy as np
import scipy
import scipy.optimize
import sklearn
from sklearn.linear_model import LinearRegression, Ridge
from sklearn.metrics import r2_score

rng = np.random.default_rng(20261203)
T, N, B, K = 80, 8, 4, 2
names = ["speed", "pupil"]
cond = np.arange(T) % B
test = np.arange(T)[(np.arange(T) // B) % 4 == 3]
train = np.setdiff1d(np.arange(T), test)

# Planted population: tuning, speed-driven gain/offset, pupil, shared gain.
f_true = 2 + 8 * rng.random((B, N))
speed = np.where(rng.random(T) < 0.4, 5 + 30 * rng.random(T), 2 * rng.random(T))
pupil = 1.0 + 0.3 * rng.standard_normal(T) + 0.01 * speed
cov = np.stack([speed, pupil], axis=1)
zt = (cov - cov.mean(0)) / cov.std(0)
a_true = 0.2 + 0.1 * rng.standard_normal((N, K))
o_true = 0.5 * rng.standard_normal((N, K))
shared = 0.15 * rng.standard_normal(T)
rate = (1 + zt @ a_true.T + shared[:, None]) * f_true[cond] + zt @ o_true.T
y = rng.poisson(np.maximum(rate, 0.1)).astype(np.float32).astype(np.float64)

# --- standardisation on the training trials (ddof 0) ----------------------
mean = cov[train].mean(0)
scale = cov[train].std(0)
z = (cov - mean) / scale

# --- fixed-tuning affine regression -----------------------------------------
cm = np.stack([y[train][cond[train] == b].mean(0) for b in range(B)])  # B x N
f = cm * (1 + 0.1 * np.cos(np.arange(B)[:, None] + np.arange(N)[None, :]))


def design(j, ff, rows, bias=True):
    fj = ff[cond[rows], j][:, None]
    cols = [z[rows] * fj, z[rows]]
    if bias:
        cols.append(np.ones((len(rows), 1)))
    return np.hstack(cols)


gain0, off0, bias0, sse0 = [], [], [], []
gain_r, off_r, bias_r, obj_r = [], [], [], []
lam = 0.05
W = len(train)
for j in range(N):
    X = design(j, f, train)
    r = y[train, j] - f[cond[train], j]
    beta, *_ = np.linalg.lstsq(X, r, rcond=None)
    # the same fit by scikit-learn, as a cross-check of the reference itself
    lr = LinearRegression().fit(X[:, :2 * K], r)
    assert np.allclose(lr.coef_, beta[:2 * K], atol=1e-9) and abs(lr.intercept_ - beta[2 * K]) < 1e-9
    gain0.append(beta[:K]); off0.append(beta[K:2 * K]); bias0.append(beta[2 * K])
    sse0.append(float(np.sum((r - X @ beta) ** 2)))
    # ridge: penalty lam * diag(X^T X) on the gain and offset columns = ridge
    # with alpha = lam * W on columns scaled to unit root mean square.
    Xs = X[:, :2 * K]
    s = np.sqrt((Xs ** 2).mean(0))
    rd = Ridge(alpha=lam * W, fit_intercept=True, solver="cholesky", tol=1e-12).fit(Xs / s, r)
    b = rd.coef_ / s
    gain_r.append(b[:K]); off_r.append(b[K:]); bias_r.append(rd.intercept_)
    pen = lam * (Xs ** 2).sum(0)
    res = r - Xs @ b - rd.intercept_
    obj_r.append(float(np.sum(res ** 2) + np.sum(pen * b ** 2)))

gain0, off0, bias0 = np.array(gain0), np.array(off0), np.array(bias0)

# held-out scores of the ridge-0 fit
pred_state = (1 + z[test] @ gain0.T) * f[cond[test]] + z[test] @ off0.T + bias0
pred_stim = f[cond[test]]
r2_stim = [r2_score(y[test, j], pred_stim[:, j]) for j in range(N)]
r2_state = [r2_score(y[test, j], pred_state[:, j]) for j in range(N)]

# condition share (eta squared) of each covariate over the training trials
eta2 = []
for k in range(K):
    c = cov[train, k]
    cb = cond[train]
    gm = c.mean()
    between = sum((cb == b).sum() * (c[cb == b].mean() - gm) ** 2 for b in range(B))
    eta2.append(float(between / ((c - gm) ** 2).sum()))

# --- joint fit with a free per-condition tuning (no bias) -------------------
alt = {"f": np.zeros((B, N)), "gain": np.zeros((N, K)), "offset": np.zeros((N, K)), "objective": []}
alt_r = {"f": np.zeros((B, N)), "gain": np.zeros((N, K)), "offset": np.zeros((N, K)), "objective": []}
ct = cond[train]
for j in range(N):
    yj = y[train, j]
    X0 = design(j, cm, train, bias=False)
    pen = lam * (X0 ** 2).sum(0)  # penalty weights from f0 = condition means

    for lamb, out in ((0.0, alt), (lam, alt_r)):
        def resid(p):
            fb, a, o = p[:B], p[B:B + K], p[B + K:]
            e = yj - (1 + z[train] @ a) * fb[ct] - z[train] @ o
            if lamb > 0:
                e = np.concatenate([e, np.sqrt(pen) * np.concatenate([a, o])])
            return e
        def jac(p):
            fb, a = p[:B], p[B:B + K]
            g = 1 + z[train] @ a
            out = np.zeros((len(yj), B + 2 * K))
            out[np.arange(len(yj)), ct] = -g
            out[:, B:B + K] = -z[train] * fb[ct][:, None]
            out[:, B + K:] = -z[train]
            if lamb > 0:
                out = np.vstack([out, np.hstack([np.zeros((2 * K, B)), np.diag(np.sqrt(pen))])])
            return out

        # The analytic Jacobian matters: with finite differences the solver
        # stops early in the flat valley where gain and offset trade off.
        p0 = np.concatenate([cm[:, j], np.zeros(2 * K)])
        sol = scipy.optimize.least_squares(resid, p0, jac=jac, method="lm", xtol=1e-15, ftol=1e-15, gtol=1e-15,
                                           max_nfev=20000)
        out["f"][:, j] = sol.x[:B]
        out["gain"][j] = sol.x[B:B + K]
        out["offset"][j] = sol.x[B + K:]
        out["objective"].append(float(np.sum(resid(sol.x) ** 2)))

# --- shared state from the other half of the population ---------------------
half = np.array([True, False, True, True, False, False, True, False])  # half A
wts = np.where(cm > 0, 1 / np.where(cm > 0, cm, 1), 0)  # rate weights 1/f, f = condition means


def pop_state(group, additive):
    out = []
    for t in range(T):
        b = cond[t]
        fb = cm[b, group]
        r = y[t, group] - fb
        sw = np.sqrt(wts[b, group])
        X = fb[:, None] if not additive else np.stack([fb, np.ones_like(fb)], 1)
        sol, *_ = np.linalg.lstsq(X * sw[:, None], r * sw, rcond=None)
        out.append(sol)
    return np.array(out)


gainA = pop_state(half, False)[:, 0]
stA = pop_state(half, True)
stB = pop_state(~half, True)
pg_stim, pg_state = np.zeros(N), np.zeros(N)
for side_half, est in ((half, stB), (~half, stA)):
    zz = (est - est[train].mean(0)) / est[train].std(0)
    for j in np.flatnonzero(side_half):
        fj = cm[cond, j][:, None]
        X = np.hstack([zz * fj, zz])
        lr = LinearRegression().fit(X[train], y[train, j] - cm[cond[train], j])
        pred = cm[cond[test], j] + lr.predict(X[test])
        pg_stim[j] = r2_score(y[test, j], cm[cond[test], j])
        pg_state[j] = r2_score(y[test, j], pred)

L = lambda a: [float(v) for v in np.asarray(a).ravel()]
out = {
    "generator": "testdata/state/gen_state.py",
    "versions": {"python": platform.python_version(), "numpy": np.__version__,
                 "scipy": scipy.__version__, "sklearn": sklearn.__version__},
    "T": T, "N": N, "B": B, "K": K, "names": names,
    "y": L(y), "cond": [int(c) for c in cond], "cov": L(cov),
    "train": [int(t) for t in train], "test": [int(t) for t in test],
    "f": L(f),
    "std_mean": L(mean), "std_scale": L(scale),
    "affine": {"gain": L(gain0), "offset": L(off0), "bias": L(bias0), "sse": sse0},
    "ridge": {"lambda": lam, "gain": L(gain_r), "offset": L(off_r), "bias": L(bias_r), "objective": obj_r},
    "heldout": {"r2_stim": L(r2_stim), "r2_state": L(r2_state)},
    "eta2": eta2,
    "alternating": {k: L(v) for k, v in alt.items()},
    "alternating_ridge": {k: L(v) for k, v in alt_r.items()},
    "population": {"half": [bool(h) for h in half], "gain_only_from_a": L(gainA),
                   "from_a": L(stA), "from_b": L(stB), "r2_stim": L(pg_stim), "r2_state": L(pg_state)},
}
with open("testdata/state/state_ref.json", "w") as fh:
    json.dump(out, fh, indent=1)
    fh.write("\n")
