"""The measured search behind the net training budget (docs/theory.md, "Training budget").

Benchmark data of ``tests/benchmarks/bench_campaign.py`` (graph manifold, d = 3 in R^64, default bump target
with s = 1, noise sd 0.1), sizes 256, 1024, 4096, 3 repeats, fixed test set of 2048 rows. Learners: the
previous fixed budget (500 steps, learning rate 3e-3) and the step rule of ``TrainingBudget`` with several
learning-rate rules. Printed: mean noise-free test MSE per n (and its spread over repeats), mean steps,
seconds. Every learner sees the same points and seeds; a store in the output folder lets a run resume.

Run::

    python docs/scripts/budget_search.py [--out DIR] [--sizes 256 1024 4096] [--repeats 3]
"""

from __future__ import annotations

import argparse
import os
import tempfile
import time

import numpy as np


CONFIGS = {
    "fixed 500 steps, lr 3e-3": {"budget": "fixed"},
    "rule 60 epochs, lr 3e-3": {"budget": {"epochs": 60, "steps_min": 800, "steps_max": 6000, "lr_base": 3e-3,
                                           "lr_width_power": 0.0}},
    "rule, lr 1e-3": {"budget": {"lr_base": 1e-3, "lr_width_power": 0.0}},
    "rule, lr 3e-3": {"budget": {"lr_base": 3e-3, "lr_width_power": 0.0}},
    "rule, lr 1e-2": {"budget": {"lr_base": 1e-2, "lr_width_power": 0.0}},
    "rule, lr 3e-3 (64/w)^0.5": {"budget": {"lr_base": 3e-3, "lr_width_power": 0.5}},
    "rule, lr 1e-2 (64/w)^0.5": {"budget": {"lr_base": 1e-2, "lr_width_power": 0.5}},
    "rule, lr 1e-2 (64/w)^1": {"budget": {"lr_base": 1e-2, "lr_width_power": 1.0}},
    "500 steps, lr 1e-2 (64/w)^1": {"budget": {"steps_min": 500, "steps_max": 500, "lr_base": 1e-2,
                                                "lr_width_power": 1.0}},
}


def main(argv=None):
    from manireg.curves import Campaign, LearnerSpec
    from manireg.data import make_regression, manifolds

    ap = argparse.ArgumentParser()
    ap.add_argument("--out", default=os.path.join(tempfile.gettempdir(), "manireg-budget-search"))
    ap.add_argument("--sizes", type=int, nargs="+", default=[256, 1024, 4096])
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--configs", nargs="+", default=None, help="names of CONFIGS to run (default: all)")
    args = ap.parse_args(argv)
    os.makedirs(args.out, exist_ok=True)
    n_total = max(args.sizes) + 2048
    sample = make_regression(manifolds.graph_manifold(n_total, d=3, ambient_dim=64, seed=0), 1.0, noise_std=0.1,
                             seed=1)
    names = args.configs or list(CONFIGS)
    learners = [LearnerSpec("net", name=nm, params=CONFIGS[nm]) for nm in names]
    print(f"load average at start: {os.getloadavg()}")
    for spec in learners:  # one learner at a time, so the seconds column is that learner's alone
        t0 = time.perf_counter()
        camp = Campaign.from_regression_sample(sample, sizes=args.sizes, repeats=args.repeats, test_size=2048,
                                               learners=[spec], name="budget-search", seed=0,
                                               store=os.path.join(args.out, "search.sqlite"))
        res = camp.run(progress=False)
        rows = res.rows
        print(f"\n{spec.name}  ({time.perf_counter() - t0:.1f} s wall incl. resumed cells, load {os.getloadavg()[0]:.1f})")
        for n, g in rows.groupby("n"):
            e = g["test_mse_clean"].to_numpy(float)
            print(f"  n={n:5d}  clean test MSE {e.mean():.5f} (sd {e.std(ddof=1):.5f})  steps {g['steps'].mean():6.0f}"
                  f"  best step {g['best_step'].mean():6.0f}  stop {','.join(sorted(set(g['stop_reason'])))}"
                  f"  seconds {g['seconds'].max():6.1f}")
    print(f"\nload average at end: {os.getloadavg()}")


if __name__ == "__main__":
    main()
