"""Recovery of a known s by the local-differences route (docs/theory.md, Estimating s).

Run: python docs/scripts/smoothness_recovery.py
"""

import numpy as np

from manireg.curves.smoothness import difference_smoothness
from manireg.data import graph_manifold, make_regression, sphere

for gen, d in (("sphere", 2), ("sphere", 3), ("graph", 2)):
    for s in (0.25, 0.5, 0.75, 1.0):
        est, covered = [], 0
        for seed in range(3):
            samp = sphere(4000, d, ambient_dim=10, seed=seed) if gen == "sphere" else graph_manifold(4000, d, 20, seed=seed)
            reg = make_regression(samp, s, noise_std=0.1, seed=seed + 50)
            r = difference_smoothness(reg.X, reg.y, seed=seed)
            covered += r["interval"][0] <= s <= r["interval"][1]
            est.append(r["smoothness"])
        print(f"| {gen} | {d} | {s:g} | {min(est):.2f}-{max(est):.2f} | {covered}/3 |")
