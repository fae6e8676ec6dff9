"""Reference values for stria's one-way ANOVA F test (eval.Scores.SignalF, SignalP).

Run from the repository root: /usr/bin/python3 testdata/eval/gen_anova.py
Writes testdata/eval/anova_ref.json: for each case, the trials of each condition
and scipy.stats.f_oneway's F statistic and p-value.
"""
import json
import os

import numpy as np
import scipy
import scipy.stats

rng = np.random.default_rng(20261203)
cases = []


def add(name, groups, note):
    # Values rounded to float32 first: stria reads responses as float32.
    groups = [np.asarray(g, dtype=np.float32).astype(np.float64) for g in groups]
    f, p = scipy.stats.f_oneway(*groups)
    cases.append({"name": name, "note": note, "groups": [list(map(float, g)) for g in groups],
                  "f": float(f), "p": float(p)})


add("e8", [[1, 3], [2, 4, 9]], "check value E8's two conditions")
add("unequal_null", [rng.normal(5, 2, n) for n in (2, 3, 5, 2, 4, 3)], "no condition effect, unequal counts")
add("unequal_effect", [rng.normal(m, 1, n) for m, n in ((1, 3), (2, 2), (4, 4), (2.5, 3), (0.5, 5))],
    "a condition effect, unequal counts")
add("poisson_12", [rng.poisson(3 + 2 * np.cos(2 * np.pi * b / 12), 2 + b % 3) for b in range(12)],
    "Poisson counts at 12 orientations, 2-4 trials each")

out = {"versions": {"numpy": np.__version__, "scipy": scipy.__version__}, "anova": cases}
path = os.path.join(os.path.dirname(os.path.abspath(__file__)), "anova_ref.json")
with open(path, "w") as fh:
    json.dump(out, fh, indent=1)
    fh.write("\n")
print("wrote", path)
