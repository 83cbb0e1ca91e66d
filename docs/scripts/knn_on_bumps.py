"""kNN's exponent on the bump target on a 2-sphere in R^10 (docs/theory.md, Targets).

Run: python docs/scripts/knn_on_bumps.py S D   (e.g. 0.5 2)
"""

import sys

import numpy as np

from manireg.curves.baselines import knn_k, knn_regress
from manireg.data import make_regression, sphere

s, d = float(sys.argv[1]), int(sys.argv[2])
sizes = np.array([250, 500, 1000, 2000, 4000, 8000, 16000])
slopes = []
for rep in range(6):
    reg = make_regression(sphere(sizes[-1] + 2000, d, ambient_dim=10, seed=100 + rep), s, noise_std=0.3, seed=200 + rep)
    te, tr = np.arange(2000), np.arange(2000, len(reg.y))
    errs = [np.mean((knn_regress(reg.X[tr[:n]], reg.y[tr[:n]], reg.X[te], knn_k(n, d, s)) - reg.f_clean[te]) ** 2)
            for n in sizes]
    slopes.append(-np.polyfit(np.log(sizes), np.log(errs), 1)[0])
print(f"exponent {np.mean(slopes):.3f} (sd over repeats {np.std(slopes, ddof=1):.3f}); 2s/(2s+d) = {2 * s / (2 * s + d):.3f}")
