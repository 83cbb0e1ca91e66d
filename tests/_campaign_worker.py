"""Helper for the subprocess tests of the campaign store: run one small, fixed campaign into a store.

Usage: python _campaign_worker.py STORE [--name NAME] [--delay SECONDS] [--learners net,knn]

``--delay`` sleeps before each work unit (inside the worker, not between writes), so a test can kill the
process while the store holds some rows but not all. The delay changes no number.
"""

from __future__ import annotations

import argparse
import sys
import time

#: Tiny net settings: a few dozen full-batch steps, no wall-clock cap in play.
TINY_NET = {"max_steps": 60, "min_steps": 20, "patience_steps": 40, "eval_every": 10, "max_seconds": 1e6}


def make_campaign(store, name="resume", learners=("net", "knn"), lr=3e-3, width_multiplier=1.0, data_seed=0):
    """The small campaign every subprocess test uses (12 or 18 cells)."""
    from manireg.curves.learners import LearnerSpec
    from manireg.curves.campaign import Campaign
    from manireg.data.manifolds import graph_manifold
    from manireg.data.targets import make_regression

    sample = make_regression(graph_manifold(400, 2, 8, seed=data_seed), 1.0, noise_std=0.1, seed=data_seed + 1)
    specs = []
    for kind in learners:
        if kind == "net":
            specs.append(LearnerSpec("net", params=dict(TINY_NET, learning_rate=lr, width_multiplier=width_multiplier)))
        else:
            specs.append(LearnerSpec(kind))
    return Campaign.from_regression_sample(sample, sizes=[40, 80, 160], repeats=2, learners=specs, seed=3,
                                        name=name, store=store)


def main(argv=None):
    p = argparse.ArgumentParser()
    p.add_argument("store")
    p.add_argument("--name", default="resume")
    p.add_argument("--delay", type=float, default=0.0)
    p.add_argument("--learners", default="net,knn")
    args = p.parse_args(argv)
    import manireg.curves.execution as ex

    if args.delay > 0:
        inner = ex.run_unit

        def slow(*a, **k):
            time.sleep(args.delay)
            return inner(*a, **k)

        ex.run_unit = slow
    campaign = make_campaign(args.store, name=args.name, learners=tuple(args.learners.split(",")))
    campaign.run(progress=False)
    return 0


if __name__ == "__main__":
    sys.exit(main())
