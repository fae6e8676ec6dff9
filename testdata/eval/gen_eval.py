#!/usr/bin/python3
"""Write eval_ref.json: reference values for the Go tests of stria/eval and
stria/eval/tuning, computed with scipy, numpy and scikit-learn.

Run from the repository root:  /usr/bin/python3 testdata/eval/gen_eval.py
All inputs are synthetic and drawn from a seeded numpy generator, so the
output is reproducible with the same library versions (recorded in the file).
"""
import json
import os
import platform
import warnings

import numpy as np
import scipy
import scipy.optimize
import scipy.stats
import sklearn
from sklearn.metrics import explained_variance_score, r2_score

rng = np.random.default_rng(20240611)
out = {
    "generator": "testdata/eval/gen_eval.py",
    "versions": {
        "python": platform.python_version(),
        "numpy": np.__version__,
        "scipy": scipy.__version__,
        "sklearn": sklearn.__version__,
    },
}


def vm(period):
    def f(x, b, a, kappa, mu):
        return b + a * np.exp(kappa * (np.cos(2 * np.pi * (x - mu) / period) - 1))
    return f


# --- von Mises fits with scipy.optimize.curve_fit -------------------------
# Condition means with N_b trials each; weights N_b via sigma = 1/sqrt(N_b),
# so curve_fit minimises sum_b N_b (f(x_b) - ybar_b)^2 like the Go fit.
fits = []
specs = [
    # name, period, nbins, true (b, A, kappa, mu), trials per bin (lo, hi), noise sd, empty bins
    ("direction_60", 360.0, 60, (1.0, 4.0, 2.5, 123.0), (10, 10), 1.5, []),
    ("orientation_36_unequal", 180.0, 36, (0.5, 2.0, 1.2, 170.0), (3, 15), 1.0, []),
    ("direction_24_gaps", 360.0, 24, (2.0, 6.0, 6.0, 20.0), (4, 12), 2.0, [5, 6, 17]),
]
for name, period, nbins, true, (lo, hi), sd, empty in specs:
    step = period / nbins
    centers = step / 2 + step * np.arange(nbins)
    counts = rng.integers(lo, hi + 1, size=nbins)
    counts[empty] = 0
    f = vm(period)
    means = np.zeros(nbins)
    for b in range(nbins):
        if counts[b] > 0:
            trials = f(centers[b], *true) + sd * rng.standard_normal(counts[b])
            means[b] = trials.mean()
    keep = counts > 0
    p0 = [true[0] + 0.3, true[1] * 0.8, true[2] * 1.3, true[3] + 10]
    popt, _ = scipy.optimize.curve_fit(
        f, centers[keep], means[keep], p0=p0, sigma=1 / np.sqrt(counts[keep]),
        absolute_sigma=False, maxfev=20000, xtol=1e-14, ftol=1e-14)
    popt = list(popt)
    # Canonical form: kappa > 0, A of either sign, mu in [0, period).
    popt[3] = popt[3] % period
    sse = float(np.sum(counts[keep] * (f(centers[keep], *popt) - means[keep]) ** 2))
    fits.append({
        "name": name, "period": period, "centers": centers.tolist(),
        "counts": counts.tolist(), "means": means.tolist(), "true": list(true),
        "p0": p0, "params": popt, "sse": sse,
        "note": "scipy.optimize.curve_fit (lm), sigma=1/sqrt(N_b); params [b, A, kappa, mu]",
    })
out["vonmises_fits"] = fits

# --- Wilcoxon signed-rank ---------------------------------------------------
wil = []


def add_wilcoxon(name, x, y, method="auto", note=""):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = scipy.stats.wilcoxon(x, y, method=method)
    wil.append({"name": name, "x": list(map(float, x)), "y": list(map(float, y)),
                "scipy_method": method, "W": float(res.statistic), "p": float(res.pvalue),
                "note": note})


x = rng.normal(0, 1, 10); y = x + rng.normal(0.6, 1, 10)
add_wilcoxon("n10_exact", x, y, note="n <= 50, no ties, no zeros: scipy exact")
x = rng.normal(0, 1, 25); y = x + rng.normal(0.2, 1, 25)
add_wilcoxon("n25_exact", x, y, note="scipy exact")
x = rng.normal(0, 1, 50); y = x + rng.normal(-0.3, 1, 50)
add_wilcoxon("n50_exact", x, y, note="largest n for exact in scipy auto")
x = rng.normal(0, 1, 80); y = x + rng.normal(0.25, 1, 80)
add_wilcoxon("n80_normal", x, y, note="n > 50: normal approximation, correction=False")
x = np.round(rng.normal(0, 2, 120)); y = np.round(rng.normal(0.4, 2, 120))
add_wilcoxon("n120_ties_zeros", x, y, note="rounded data: ties and zeros, normal with tie correction")
x = np.round(rng.normal(0, 3, 30)); y = np.round(rng.normal(1.0, 3, 30))
add_wilcoxon("n30_ties_zeros", x, y, note="n <= 50 with zeros: scipy switches to normal")
x = np.array([1.5, 2.0, 3.0, 4.5, 5.0, 6.0, 7.5, 8.0, 9.0, 10.0, 11.0, 12.5])
y = x - np.array([1, -1, 2, 2, -3, 3, 4, -4, 5, 6, 7, 8], dtype=float)
add_wilcoxon("n12_ties_nozeros_approx", x, y, method="approx",
             note="ties without zeros at n <= 50: scipy 1.10 auto would use the exact table with a "
                  "truncated rank sum; stria uses the normal approximation, so the reference is method='approx'")
out["wilcoxon"] = wil

# --- Pearson, R2, explained variance score -----------------------------------
pear, reg = [], []
for i, n in enumerate([5, 40, 500]):
    x = rng.normal(0, 1, n)
    y = 0.5 * x + rng.normal(0, 1, n) + 3
    r, p = scipy.stats.pearsonr(x, y)
    pear.append({"name": f"pearson_n{n}", "x": x.tolist(), "y": y.tolist(), "r": float(r)})
    yhat = y + rng.normal(0.4, 0.8, n)  # with an offset: R2 < EV score
    reg.append({"name": f"regression_n{n}", "y": y.tolist(), "yhat": yhat.tolist(),
                "r2": float(r2_score(y, yhat)),
                "ev": float(explained_variance_score(y, yhat))})
out["pearson"] = pear
out["regression"] = reg

path = os.path.join(os.path.dirname(os.path.abspath(__file__)), "eval_ref.json")
with open(path, "w") as fh:
    json.dump(out, fh, indent=1)
    fh.write("\n")
print("wrote", path)
