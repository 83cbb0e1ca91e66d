"""Calibration of the exponent's interval, the verdict and the extrapolation check on simulated campaigns.

The simulated campaigns (manireg.curves.simulation) have the structure of real ones: a per-repeat random
effect, nested training sets (errors of one repeat correlated across sizes), one test set shared by every
cell, and independent scatter. Prints the tables quoted in docs/fitting.md:

    python tests/benchmarks/bench_fitting.py            # 300 / 80 campaigns per cell (about 20 minutes on a busy 2-core machine)
    python tests/benchmarks/bench_fitting.py --quick    # fewer runs
    python tests/benchmarks/bench_fitting.py --only verdicts --scatter 0.1   # one table
"""

from __future__ import annotations

import argparse
import os
import sys
import time
import warnings

import numpy as np

from manireg.curves.simulation import coverage, errors_to_rows, measured_rate, run_fits, simulate_errors

SIZES = np.geomspace(100, 10_000, 7).round()


def coverage_table(runs):
    print(f"## coverage of the 95% interval (b = 0.5, 7 sizes 100..10^4, {runs} campaigns per cell; "
          "per-repeat and bootstrap: a third as many)")
    print("| repeats | cell scatter | jackknife + t (default) | per-repeat + t | percentile bootstrap | 'measured' |")
    print("|---|---|---|---|---|---|")
    for R in (3, 5, 8, 12):
        for sc in (0.05, 0.1, 0.2):
            seed = 1000 * R + int(100 * sc)
            jk = run_fits(runs=runs, repeats=R, sizes=SIZES, scatter=sc, seed=seed)
            pr = run_fits(runs=max(runs // 3, 20), repeats=R, sizes=SIZES, scatter=sc, seed=seed + 1,
                          fit_kwargs={"interval": "per_repeat"})
            bs = run_fits(runs=max(runs // 3, 20), repeats=R, sizes=SIZES, scatter=sc, seed=seed + 2,
                          fit_kwargs={"interval": "bootstrap", "n_boot": 300})
            print(f"| {R} | {sc:g} | {coverage(jk, 0.5):.3f} | {coverage(pr, 0.5):.3f} | {coverage(bs, 0.5):.3f} "
                  f"| {measured_rate(jk):.2f} |", flush=True)


CURVES = {
    "clean power law b = 0.5": dict(exponent=0.5),
    "kink 0.6 -> 0.4 at n = 1000": dict(exponent=0.6, bend=("kink", 1000, 0.4)),
    "smooth bend 0.6 -> 0.4": dict(exponent=0.6, bend=("smooth", 0.4)),
    "smooth bend 0.4 -> 0.6": dict(exponent=0.4, bend=("smooth", 0.6)),
    "kink 0.8 -> 0.3 at n = 1000": dict(exponent=0.8, bend=("kink", 1000, 0.3)),
}
CHOICES = ("none", "fit", "fit-unbounded", "estimate", "value")


def verdict_table(runs, repeats, scatter):
    print(f"\n## 'measured' rate, {repeats} repeats, cell scatter {scatter:g}, {runs} campaigns per cell "
          "(true floor 0 for 'none', 0.003 otherwise)")
    print("| curve | " + " | ".join(CHOICES) + " |")
    print("|---|" + "---|" * len(CHOICES))
    for name, kw in CURVES.items():
        cells = []
        for i, ch in enumerate(CHOICES):
            c = 0.0 if ch == "none" else 0.003
            fits = run_fits(runs=runs, repeats=repeats, sizes=SIZES, scatter=scatter, floor=c, choice=ch,
                            seed=7 + 31 * i, **kw)
            cells.append(f"{measured_rate(fits):.2f}")
        print(f"| {name} | " + " | ".join(cells) + " |", flush=True)


def extrapolation_table(runs):
    from manireg.curves.planning import extrapolation_check

    print(f"\n## extrapolation check: held-out largest size inside its 95% interval ({runs} campaigns)")
    print("| repeats | cell scatter | inside |")
    print("|---|---|---|")
    for R in (5, 8):
        for sc in (0.05, 0.1):
            E = simulate_errors(runs=runs, repeats=R, sizes=SIZES, scatter=sc, seed=77 + R)
            hits = 0
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                for e in E:
                    hits += extrapolation_check(errors_to_rows(e, SIZES), holdout=1).table[0]["inside_band"]
            print(f"| {R} | {sc:g} | {hits / runs:.3f} |", flush=True)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="200 / 40 / 100 campaigns per cell")
    ap.add_argument("--runs", type=int, default=300, help="campaigns per coverage cell")
    ap.add_argument("--verdict-runs", type=int, default=80, help="campaigns per verdict cell")
    ap.add_argument("--only", choices=["coverage", "verdicts", "extrapolation"], help="print one table")
    ap.add_argument("--scatter", type=float, nargs="+", default=[0.05, 0.1], help="cell scatters of the verdict tables")
    args = ap.parse_args(argv)
    runs, vruns = (200, 40) if args.quick else (args.runs, args.verdict_runs)
    t0 = time.time()
    print(f"load average at start {os.getloadavg()[0]:.1f} (a shared machine)")
    if args.only in (None, "coverage"):
        coverage_table(runs)
    if args.only in (None, "verdicts"):
        for sc in args.scatter:
            verdict_table(vruns, 5, sc)
    if args.only in (None, "extrapolation"):
        extrapolation_table(runs // 2)
    print(f"\n{time.time() - t0:.0f} s; load average {os.getloadavg()[0]:.1f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
