"""Noise-variance estimates against the true variance on the generators (sphere S^d, Hölder targets).

    python tests/benchmarks/bench_noise.py

Prints estimate / true variance (mean over 5 data sets) and how often the 95% interval holds the truth.
"""

from __future__ import annotations

import numpy as np

from manireg.curves.noise import noise_variance
from manireg.data import make_regression, sphere

SIGMA2 = 0.01


def main():
    print("| target | d | s | n | first neighbour | Gamma (k = 10) | Gamma interval | interval holds the truth |")
    print("|---|---|---|---|---|---|---|---|")
    for kind in ("lacunary", "bumps"):
      for d in (2, 4):
        for s in (0.5, 1.0, 2.0):
            for n in (1000, 4000):
                fn, gm, lo, hi, hit = [], [], [], [], []
                for rep in range(5):
                    sample = make_regression(sphere(n, d, ambient_dim=d + 5, seed=rep), s, kind=kind,
                                             noise_std=SIGMA2**0.5, seed=100 + rep)
                    fn.append(noise_variance(sample.X, sample.y, method="first_neighbor").value / SIGMA2)
                    g = noise_variance(sample.X, sample.y)
                    gm.append(g.value / SIGMA2)
                    lo.append(g.interval[0] / SIGMA2)
                    hi.append(g.interval[1] / SIGMA2)
                    hit.append(g.interval[0] <= SIGMA2 <= g.interval[1])
                print(f"| {kind} | {d} | {s:g} | {n} | {np.mean(fn):.2f} | {np.mean(gm):.2f} | "
                      f"[{np.mean(lo):.2f}, {np.mean(hi):.2f}] | {np.mean(hit):.1f} |", flush=True)


if __name__ == "__main__":
    main()
