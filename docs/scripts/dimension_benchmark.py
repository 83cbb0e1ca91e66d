"""Measure the dimension consensus: scikit-dimension's benchmark manifolds, interval coverage, ambient noise.

Run from the repository root (each part prints a Markdown table; docs/dimension.md quotes them):

    python docs/scripts/dimension_benchmark.py benchmark   # raw vs calibrated, 3 runs, n = 1000
    python docs/scripts/dimension_benchmark.py coverage    # interval coverage over seeds (slow: minutes)
    python docs/scripts/dimension_benchmark.py noise       # consensus under ambient noise, n = 2000
    python docs/scripts/dimension_benchmark.py geometry    # describe_geometry on the noisiest sheet completes
    python docs/scripts/dimension_benchmark.py figure      # docs/img/dimension_calibration.png

The machine's load is printed beside each table (os.getloadavg()); no timing is claimed.
"""

from __future__ import annotations

import argparse
import os
import warnings

import numpy as np

BENCH = ["M1_Sphere", "M2_Affine_3to5", "M3_Nonlinear_4to6", "M4_Nonlinear", "M5b_Helix2d", "M6_Nonlinear",
         "M7_Roll", "M9_Affine", "M10a_Cubic", "M10b_Cubic", "M12_Norm", "M13a_Scurve", "Mp2_Paraboloid"]


def _estimate(X, **kw):
    from manireg.geometry.dimension import estimate_dimension

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return estimate_dimension(X, estimators=("mle", "twonn"), **kw)


def benchmark(runs: int = 3, n: int = 1000):
    import skdim

    print(f"n = {n}, {runs} runs (BenchmarkManifolds(random_state=run), each set drawn alone); "
          f"load {os.getloadavg()}")
    print("| manifold | d | raw MLE (k 10..20) | raw TwoNN | raw consensus | calibrated (ball) | calibrated (sphere) "
          "| rel. error (ball) |")
    print("|---|---|---|---|---|---|---|---|")
    for name in BENCH:
        rows = []
        for run in range(runs):
            b = skdim.datasets.BenchmarkManifolds(random_state=run)
            d, D, _ = b._dict_truth[name]
            X = b.generate(name=name, n=n, dim=D, d=d)
            rep = _estimate(X, n_boot=0, seed=0)
            alt = _estimate(X, n_boot=0, seed=0, reference="sphere")
            est = {e.estimator: e.dimension for e in rep.estimates}
            rows.append((est["mle"], est["twonn"], rep.raw_consensus, rep.consensus, alt.consensus))
        r = np.array(rows)
        cells = [" / ".join(f"{v:.2f}" for v in r[:, j]) for j in range(5)]
        rel = " / ".join(f"{(v - d) / d:+.2f}" for v in r[:, 3])
        print(f"| {name} | {d} | " + " | ".join(cells) + f" | {rel} |")


def coverage(seeds: int = 20, n: int = 1000, which=None):
    from scipy.stats import t as student

    from manireg.data.manifolds import graph_manifold, sphere, swiss_roll, torus
    from manireg.geometry.dimension import MLEDimension

    cases = [
        ("sphere d=2", lambda s: sphere(n, 2, ambient_dim=10, seed=s), "sphere"),
        ("sphere d=3", lambda s: sphere(n, 3, ambient_dim=10, seed=s), "sphere"),
        ("sphere d=5", lambda s: sphere(n, 5, ambient_dim=10, seed=s), "sphere"),
        ("torus d=2", lambda s: torus(n, seed=s), "sphere"),
        ("swiss roll d=2", lambda s: swiss_roll(n, seed=s), "ball"),
        ("graph d=3 D=30", lambda s: graph_manifold(n, 3, 30, frequency=0.5, seed=s), "ball"),
        ("graph d=5 D=40", lambda s: graph_manifold(n, 5, 40, frequency=0.5, seed=s), "ball"),
    ]
    if which:
        cases = [c for c in cases if c[0] in which]
    half = 1.96 * np.sqrt(0.95 * 0.05 / seeds)
    print(f"n = {n}, {seeds} seeds, nominal 95 % (binomial sd {half / 1.96:.3f}, so 0.95 +- {half:.3f} is the "
          f"range for an honest interval); load {os.getloadavg()}")
    print("| set | default (ball) reference: interval covers d | mean width | matching reference: covers d | "
          "matching reference, sampling part only (consensus +- t se): covers d | per-point bootstrap of the MLE "
          "(k 10..20): covers d | sd of the consensus over seeds | mean jackknife se |")
    print("|---|---|---|---|---|---|---|---|")
    for label, make, ref in cases:
        hit_def = hit_ref = hit_boot = hit_samp = 0
        widths, values, ses = [], [], []
        for s in range(seeds):
            X = make(1000 + s).points
            rep = _estimate(X, n_boot=1, seed=s)
            alt = rep if ref == "ball" else _estimate(X, n_boot=1, seed=s, reference=ref)
            d = round(float(make(1000 + s).dimension))
            hit_def += rep.consensus_lower <= d <= rep.consensus_upper
            hit_ref += alt.consensus_lower <= d <= alt.consensus_upper
            widths.append(rep.consensus_upper - rep.consensus_lower)
            values.append(alt.consensus)
            lo, hi = MLEDimension(n_boot=200, random_state=s).fit(X).interval_
            hit_boot += lo <= d <= hi
            ses.append(alt.consensus_se)
            B = int(alt.interval_kind.split("over ")[1].split(" blocks")[0])
            q = student.ppf(0.975, B - 1)
            hit_samp += abs(alt.consensus - d) <= q * alt.consensus_se
        print(f"| {label} | {hit_def / seeds:.3f} | {np.mean(widths):.3f} | {hit_ref / seeds:.3f} | "
              f"{hit_samp / seeds:.3f} | {hit_boot / seeds:.3f} | {np.std(values, ddof=1):.3f} | "
              f"{np.nanmean(ses):.3f} |")


def noise(n: int = 2000):
    from scipy.spatial.distance import pdist

    from manireg.data.manifolds import graph_manifold, sphere

    cases = [
        ("curved 2-D sheet in R^40 (graph_manifold d=2, frequency 2)", lambda nz: graph_manifold(n, 2, 40, noise=nz, seed=1), 2),
        ("flatter 2-D sheet in R^40 (frequency 0.5)", lambda nz: graph_manifold(n, 2, 40, frequency=0.5, noise=nz, seed=1), 2),
        ("3-sphere in R^30", lambda nz: sphere(n, 3, ambient_dim=30, noise=nz, seed=1), 3),
        ("5-d graph manifold in R^40 (frequency 0.5)", lambda nz: graph_manifold(n, 5, 40, frequency=0.5, noise=nz, seed=1), 5),
    ]
    print(f"n = {n}, seed 1, noise sigma = fraction x diameter in every coordinate; load {os.getloadavg()}")
    print("| set | d | noise | raw MLE (k 10..20) | TwoNN | consensus (ball) [interval] | window | noise scale | "
          "left out |")
    print("|---|---|---|---|---|---|---|---|---|")
    for label, make, d in cases:
        diam = pdist(make(0.0).points[:1000]).max()
        for frac in (0.0, 0.005, 0.0075, 0.01):
            rep = _estimate(make(frac * diam).points, n_boot=1, seed=0)
            est = {e.estimator: e.dimension for e in rep.estimates}
            left = ", ".join(f"{k} {v:.2f}" for k, v in rep.disagreeing.items()) or "-"
            print(f"| {label} | {d} | {frac:.2%} | {est['mle']:.2f} | {est['twonn']:.2f} | {rep.consensus:.2f} "
                  f"[{rep.consensus_lower:.2f}, {rep.consensus_upper:.2f}] | {rep.window[0]}..{rep.window[1]} | "
                  f"{rep.noise_scale:.0f} | {left} |")


def geometry():
    """The whole geometry read-out on the flatter sheet with 0.75 % noise (n = 2000): it must complete."""
    from scipy.spatial.distance import pdist

    from manireg.data.manifolds import graph_manifold
    from manireg.geometry import describe_geometry

    diam = pdist(graph_manifold(2000, 2, 40, frequency=0.5, seed=1).points[:1000]).max()
    X = graph_manifold(2000, 2, 40, frequency=0.5, noise=0.0075 * diam, seed=1).points
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            g = describe_geometry(X, embed=False, n_boot=1, seed=0)
        except Exception as exc:  # the previous version stopped here
            print(f"stopped: {type(exc).__name__}: {exc}")
            return
    print(f"consensus {g.dimension.consensus:.2f}; d used {g.dimension_used} ({g.dimension_source}); "
          f"{g.atlas.n_charts} charts")


def figure():
    import matplotlib

    matplotlib.use("Agg")
    from manireg.geometry.dimension.calibration import calibration_table
    from manireg.plots.dimension import plot_dimension_calibration

    table = calibration_table(1000, (4, 8, 16, 32, 64), seed=0)
    fig = plot_dimension_calibration(table, estimator="mle", raw=13.6)
    fig.savefig("docs/img/dimension_calibration.png", dpi=110, bbox_inches="tight")
    print("wrote docs/img/dimension_calibration.png")


if __name__ == "__main__":
    p = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("part", choices=("benchmark", "coverage", "noise", "geometry", "figure"))
    p.add_argument("--runs", type=int, default=3)
    p.add_argument("--seeds", type=int, default=20)
    p.add_argument("--sets", nargs="*", help="coverage: only these sets (labels as printed)")
    a = p.parse_args()
    {"benchmark": lambda: benchmark(a.runs), "coverage": lambda: coverage(a.seeds, which=a.sets), "noise": noise,
     "geometry": geometry, "figure": figure}[a.part]()
