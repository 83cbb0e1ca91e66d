"""Benchmark: chart atlas + reach estimate against the dimension estimate on the same data.

Data: ``graph_manifold(n, d=4, ambient_dim=64, amplitude=0.3, frequency=0.5)`` (20,000 points by default, 5,000 with ``--quick``).
The neighbour cache is cleared before each timed step, so every step pays for its own neighbour query.

The dimension estimate is ``manireg.geometry.dimension.estimate_dimension`` when it exists, otherwise the
Levina-Bickel MLE (harmonic-mean aggregation over k = 10..20) from one ``kneighbors(X, 20)`` call as a
stand-in; the output says which.

Goal: atlas (its default radius runs the reach estimate) <= 3x the dimension estimate.

Run: python tests/benchmarks/bench_charts.py [--quick] [--n N] [--seed S]
"""

from __future__ import annotations

import argparse
import time

import numpy as np


def _dimension_step(X):
    from manireg.geometry import neighbors

    try:
        from manireg.geometry.dimension import estimate_dimension
    except ImportError:
        estimate_dimension = None
    if estimate_dimension is not None:
        rep = estimate_dimension(X)
        return "manireg.geometry.dimension.estimate_dimension", float(rep.consensus)
    g = neighbors.kneighbors(X, 20)
    T = g.distances
    ks = np.arange(10, 21)
    inv = []
    for k in ks:
        local = np.log(T[:, k - 1 : k] / T[:, : k - 1]).sum(axis=1) / (k - 2)
        inv.append(np.mean(local))
    return "stand-in: MLE from one kneighbors(k=20) call", float(1.0 / np.mean(inv))


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="5,000 points instead of 20,000")
    parser.add_argument("--n", type=int, default=None, help="number of points (overrides --quick)")
    parser.add_argument("--seed", type=int, default=0)
    args = parser.parse_args(argv)
    n = args.n or (5000 if args.quick else 20000)

    from manireg.data.manifolds import graph_manifold
    from manireg.geometry.charts import ChartAtlas
    from manireg.geometry.neighbors import clear_cache
    from manireg.geometry.reach import estimate_reach

    sample = graph_manifold(n, 4, 64, amplitude=0.3, frequency=0.5, seed=args.seed)
    X = sample.points
    print(f"data: graph_manifold(n={n}, d=4, ambient_dim=64, amplitude=0.3, frequency=0.5, seed={args.seed})")

    clear_cache()
    t0 = time.perf_counter()
    which, dim = _dimension_step(X)
    t_dim = time.perf_counter() - t0
    print(f"dimension estimate [{which}]: d = {dim:.2f} in {t_dim:.2f} s")

    clear_cache()
    t0 = time.perf_counter()
    reach = estimate_reach(X, 4)
    t_reach = time.perf_counter() - t0
    print(f"reach alone: {reach.reach:.4g} (pair distance {reach.pair_distance:.3g}, n_base {reach.n_base}, "
          f"k {reach.n_neighbors}) in {t_reach:.2f} s")

    clear_cache()
    t0 = time.perf_counter()
    atlas = ChartAtlas(dimension=4).fit(X)
    t_atlas = time.perf_counter() - t0
    s = atlas.summary()
    print(f"atlas + reach (default radius rule): {s.n_charts} charts, radius {s.radius:.4g} [{s.radius_rule}], "
          f"reach {s.reach:.4g}, in {t_atlas:.2f} s")
    ratio = t_atlas / t_dim
    print(f"ratio (atlas + reach) / dimension estimate = {ratio:.2f}  (goal <= 3)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
