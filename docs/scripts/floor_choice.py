"""The floor choice on generator data with a known noise variance (docs/fitting.md, "Which floor by default").

For each sphere S^d in R^(d+5) with a bump target of Hölder order s and Gaussian label noise of variance
sigma^2, a kNN learning curve (k = n^(2s/(2s+d))) is measured in the structure of a campaign: one test set for
every cell, nested training sets within a repeat (prefixes of one shuffled pool). Printed per row:

* the noise estimate of the campaign (``noise_variance`` on the training pool, Gamma test) divided by sigma^2,
  and its interval ends divided by sigma^2;
* the exponent of the error against the noise-free target (``test_mse_clean``, no floor): the reference;
* the exponent of the noisy test error ``test_mse`` with the floor none / fit / estimate / the true value,
  each with its verdict (m = measured, s = not shown at this precision, n = not a power law).

Run: python docs/scripts/floor_choice.py            (4 to 9 minutes on a busy 2-core machine)
     python docs/scripts/floor_choice.py --quick    (one noise level)
"""

from __future__ import annotations

import argparse
import os
import sys
import time
import warnings

import numpy as np

from manireg.curves.baselines import knn_k, knn_regress
from manireg.curves.fitting import fit_exponent
from manireg.curves.noise import noise_variance
from manireg.curves.simulation import errors_to_rows
from manireg.data import make_regression, sphere

SIZES = np.array([250, 500, 1000, 2000, 4000, 8000])
N_TEST = 2000
REPEATS = 5
SHORT = {"measured": "m", "power law not shown at this precision": "s", "not a power law over this range": "n",
         "insufficient data": "i"}


def curves(d, s, noise_std, seed):
    reg = make_regression(sphere(SIZES[-1] + N_TEST, d, ambient_dim=d + 5, seed=seed), s, noise_std=noise_std,
                          seed=seed + 1)
    te, pool = np.arange(N_TEST), np.arange(N_TEST, len(reg.y))
    noisy = np.empty((REPEATS, SIZES.size))
    clean = np.empty((REPEATS, SIZES.size))
    rng = np.random.default_rng(seed + 2)
    for r in range(REPEATS):
        order = rng.permutation(pool)
        for j, n in enumerate(SIZES):
            tr = order[:n]
            pred = knn_regress(reg.X[tr], reg.y[tr], reg.X[te], knn_k(n, d, s))
            noisy[r, j] = np.mean((pred - reg.y[te]) ** 2)
            clean[r, j] = np.mean((pred - reg.f_clean[te]) ** 2)
    est = noise_variance(reg.X[pool], reg.y[pool], seed=seed)
    return noisy, clean, est, noise_std**2


def row(d, s, noise_std, seed):
    noisy, clean, est, var = curves(d, s, noise_std, seed)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ref = fit_exponent(errors_to_rows(clean, SIZES, metric="test_mse_clean"), metric="test_mse_clean", floor=None)
        rows = errors_to_rows(noisy, SIZES)
        fits = {"none": fit_exponent(rows, floor=None), "fit": fit_exponent(rows, floor="fit", noise_variance=est),
                "estimate": fit_exponent(rows, floor="estimate", noise_variance=est),
                "true value": fit_exponent(rows, floor=var)}
    lo, hi = est.interval
    cells = [f"{2 * s / (2 * s + d):.2f}", f"{ref.exponent:.2f}",
             f"{est.value / var:.2f} [{lo / var:.2f}, {hi / var:.2f}]"]
    for f in fits.values():
        cells.append(f"{f.exponent:.2f} {SHORT.get(f.verdict, '?')}" if np.isfinite(f.exponent) else "- " + SHORT.get(f.verdict, "?"))
    return cells


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="noise sd 0.1 only")
    args = ap.parse_args(argv)
    t0 = time.time()
    print(f"# load average at start {os.getloadavg()[0]:.1f} (shared machine)")
    print(f"kNN, sizes {SIZES[0]}..{SIZES[-1]}, {REPEATS} repeats, test set {N_TEST}, bump targets; exponents of "
          "test_mse with each floor (m/s/n = measured / not shown / not a power law)\n")
    print("| d | s | noise var | 2s/(2s+d) | clean exponent | estimate / true [interval] | none | fit | estimate | true value |")
    print("|---|---|---|---|---|---|---|---|---|---|")
    for noise_std in ((0.1,) if args.quick else (0.1, 0.3)):
        for d in (2, 4):
            for s in (0.5, 1.0, 2.0):
                cells = row(d, s, noise_std, seed=int(1000 * d + 100 * s + 10 * noise_std))
                print(f"| {d} | {s:g} | {noise_std**2:g} | " + " | ".join(cells) + " |", flush=True)
    print(f"\n{time.time() - t0:.0f} s; load average {os.getloadavg()[0]:.1f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
