#!/usr/bin/python3
"""Writes palette_cvd.json: stria's figure palette (eval/figure/palette.go) as
seen under simulated protanopia, deuteranopia and tritanopia, for
eval/figure/palette_test.go.

Simulation: Machado, Oliveira & Fernandes (2009), severity 100, as implemented
by colorspacious (cvd_space "sRGB1+CVD": sRGB -> linear RGB -> 3x3 matrix ->
sRGB, clipped to [0, 1] here). Distances: CAM02-UCS (colorspacious default).

Run: /usr/bin/python3 testdata/report/gen_palette.py  (from the repository root)
Needs Debian's python3-colorspacious and python3-numpy.
"""
import itertools, json, os
import numpy as np
import colorspacious as cs

PALETTE = ["#1230D8", "#F9B41E", "#9EACFF", "#514B00", "#963A6A", "#309752"]
TYPES = ["protanomaly", "deuteranomaly", "tritanomaly"]

rgb = np.array([[int(h[i:i + 2], 16) for i in (1, 3, 5)] for h in PALETTE]) / 255.0
out = {
    "source": "colorspacious %s, numpy %s; Machado et al. 2009 severity 100" % (cs.__version__ if hasattr(cs, "__version__") else "1.1.2", np.__version__),
    "palette": PALETTE,
    "matrices": {},
    "simulated_srgb1": {},
    "min_pair_cam02ucs": {},
}
ucs = {"normal": cs.cspace_convert(rgb, "sRGB1", "CAM02-UCS")}
for t in TYPES:
    out["matrices"][t] = cs.machado_et_al_2009_matrix(t, 100).tolist()
    sim = np.clip(cs.cspace_convert(rgb, {"name": "sRGB1+CVD", "cvd_type": t, "severity": 100}, "sRGB1"), 0, 1)
    out["simulated_srgb1"][t] = sim.tolist()
    ucs[t] = cs.cspace_convert(sim, "sRGB1", "CAM02-UCS")
for name, u in ucs.items():
    out["min_pair_cam02ucs"][name] = min(float(np.linalg.norm(u[a] - u[b])) for a, b in itertools.combinations(range(len(PALETTE)), 2))
here = os.path.dirname(os.path.abspath(__file__))
with open(os.path.join(here, "palette_cvd.json"), "w") as f:
    json.dump(out, f, indent=1)
    f.write("\n")
