"""Timing of manireg's dimension estimators against scikit-dimension's on the same data.

Data: ``graph_manifold(n, d=5, ambient_dim=64, frequency=0.5, seed=0)`` for each n (default 10,000 and
50,000). For each n the script prints, in one run:

* our MLE (k 10..20 is our default; here k_min = k_max = 20 to match ``skdim.id.MLE()``), TwoNN (MLE and
  linear) and local PCA (20 neighbours, 95 % variance rule) against ``skdim.id.MLE().fit``,
  ``skdim.id.TwoNN().fit`` and ``skdim.id.lPCA(ver="ratio", alphaRatio=0.95).fit_pw(n_neighbors=20)``;
  the ratio is skdim time / our time (> 1: we are faster). Each of our timings starts from a cold neighbour
  cache, so it includes its own neighbour query.
* (MLE + TwoNN fitted one after the other, sharing one neighbour query through the cache) / (one exact
  20-neighbour query with scikit-learn's ``NearestNeighbors`` on the same data).

A skdim call is skipped (with a printed note) when the previous skdim call on smaller data predicts it will
take longer than ``--budget`` seconds (time scaled by (n_new / n_old)^2 for the pairwise TwoNN, linearly
otherwise), or when n exceeds ``--skdim-max-n``.

Run::

    python tests/benchmarks/bench_dimension.py            # n = 10,000 and 50,000
    python tests/benchmarks/bench_dimension.py --quick    # n = 5,000 only
    python tests/benchmarks/bench_dimension.py --n 20000
"""

from __future__ import annotations

import argparse
import time


def _timed(fn, repeat=1):
    best = float("inf")
    out = None
    for _ in range(repeat):
        t = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t)
    return best, out


def run(ns, budget: float, skdim_max_n: int, repeat: int):
    import numpy as np
    from sklearn.neighbors import NearestNeighbors

    from manireg.data.manifolds import graph_manifold
    from manireg.geometry.dimension import LocalPCADimension, MLEDimension, TwoNNDimension
    from manireg.geometry.neighbors import clear_cache

    try:
        import skdim
    except ImportError:  # pragma: no cover
        skdim = None
        print("scikit-dimension is not installed: only our timings are printed (pip install scikit-dimension).")

    last = {}
    for n in ns:
        X = graph_manifold(n, 5, 64, frequency=0.5, seed=0).points
        print(f"\n== n = {n}, D = {X.shape[1]}, d = 5 (graph_manifold) ==")

        def knn():
            NearestNeighbors(n_neighbors=21).fit(X).kneighbors(X)

        t_knn, _ = _timed(knn, repeat)

        def cold(fn):
            def wrapped():
                clear_cache()
                return fn()
            return wrapped

        ours = {
            "mle": cold(lambda: MLEDimension(k_min=20, k_max=20, n_boot=0).fit(X).dimension_),
            "twonn": cold(lambda: TwoNNDimension(method="linear").fit(X).dimension_),
            "lpca": cold(lambda: LocalPCADimension(n_neighbors=20, n_boot=0).fit(X).dimension_),
        }

        def both():
            clear_cache()
            MLEDimension(n_boot=0).fit(X)
            TwoNNDimension().fit(X)

        theirs = {}
        if skdim is not None:
            theirs = {
                "mle": (lambda: skdim.id.MLE().fit(X).dimension_, 1),
                "twonn": (lambda: skdim.id.TwoNN().fit(X).dimension_, 2),
                "lpca": (lambda: float(np.mean(skdim.id.lPCA(ver="ratio", alphaRatio=0.95)
                                                .fit_pw(X, n_neighbors=20).dimension_pw_)), 1),
            }
        print(f"exact 20-NN query (sklearn NearestNeighbors): {t_knn:8.3f} s")
        for name, fn in ours.items():
            t_ours, d_ours = _timed(fn, repeat)
            line = f"{name:6s} ours {t_ours:8.3f} s (d = {d_ours:6.3f})"
            if name in theirs:
                fn_s, power = theirs[name]
                prev = last.get(name)
                predicted = None if prev is None else prev[1] * (n / prev[0]) ** power
                if n > skdim_max_n:
                    line += f" | skdim skipped (n > --skdim-max-n={skdim_max_n})"
                elif predicted is not None and predicted > budget:
                    line += f" | skdim skipped (predicted {predicted:.0f} s > budget {budget:.0f} s)"
                else:
                    t_s, d_s = _timed(fn_s, 1)
                    last[name] = (n, t_s)
                    line += f" | skdim {t_s:8.3f} s (d = {d_s:6.3f}) | skdim/ours = {t_s / t_ours:6.1f}x"
            print(line)
        t_both, _ = _timed(both, repeat)
        print(f"MLE + TwoNN (one shared neighbour query): {t_both:8.3f} s = {t_both / t_knn:4.2f} x one 20-NN query")


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="one small size (n = 5,000)")
    parser.add_argument("--n", type=int, nargs="+", default=None, help="sample sizes (default 10000 50000)")
    parser.add_argument("--budget", type=float, default=120.0, help="seconds allowed per skdim call (default 120)")
    parser.add_argument("--skdim-max-n", type=int, default=10**9, help="skip skdim above this n")
    parser.add_argument("--repeat", type=int, default=1, help="best of this many runs for our timings")
    args = parser.parse_args(argv)
    ns = args.n or ([5000] if args.quick else [10_000, 50_000])
    run(ns, args.budget, args.skdim_max_n, args.repeat)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
