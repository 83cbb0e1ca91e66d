"""End-to-end time of a standard learning-curve campaign: manireg's executor against one-cell-at-a-time sklearn.

Campaign: ``graph_manifold(N, d=3, ambient_dim=64, seed=0)`` with ``make_regression(smoothness=1,
noise_std=0.1, seed=1)``; sizes 256, 512, ..., 8192 (6 sizes), 5 repeats, a fixed test set of 2048 rows.

* manireg: ``Campaign(...).run(executor=..., n_jobs=...)`` with the default net learner (sized by
  ``size_network``, default ``TrainConfig``); the 5 repeats of each n are one ``BatchedTrainer.fit`` call.
* reference: the same cells (same nested training sets of size n, same test set) run one after another with
  ``sklearn.neural_network.MLPRegressor(hidden_layer_sizes=spec.hidden_sizes, early_stopping=True,
  validation_fraction=0.2, random_state=seed)`` on standardised inputs, i.e. the same hidden sizes and the
  same 20 % validation share for early stopping.

Printed: wall time of each side (data generation excluded, store writes included), the ratio
reference / manireg (> 1: manireg faster) and the mean test MSE (and noise-free test MSE) per n for both.

Run::

    python tests/benchmarks/bench_campaign.py            # the full grid above
    python tests/benchmarks/bench_campaign.py --quick    # sizes 256..2048 (4 sizes), 3 repeats
    python tests/benchmarks/bench_campaign.py --precision float32 --no-reference   # manireg side only, float32

``--precision`` sets the net learner's ``TrainConfig.precision`` (default ``auto``: bfloat16 mixed
precision for the larger nets on a CPU with native bfloat16, see docs/theory.md); the table then also
shows which arithmetic each n used.
"""

from __future__ import annotations

import argparse
import os
import tempfile
import time

import numpy as np


def sklearn_loop(campaign):
    """The campaign's cells one after another with scikit-learn's MLPRegressor (same hidden sizes, same rows,
    early stopping on 20 %, standardised inputs); returns (seconds, mean test MSEs per n)."""
    import pandas as pd
    from sklearn.neural_network import MLPRegressor
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    from manireg.curves.learners import make_learner

    data = campaign.data
    net = make_learner(data.learners[0])
    ref = []
    t0 = time.perf_counter()
    for c in campaign.cells():
        arch = net.architecture(c.n, data)
        fit_rows, val_rows = data.cell_rows(c)
        rows = np.concatenate([fit_rows, val_rows])
        model = make_pipeline(StandardScaler(), MLPRegressor(hidden_layer_sizes=arch.hidden_sizes, early_stopping=True,
                                                             validation_fraction=0.2, random_state=c.seed % 2**31))
        model.fit(data.X[rows], data.y[rows])
        pred = model.predict(data.X_test)
        ref.append({"n": c.n, "repeat": c.repeat, "test_mse": float(np.mean((pred - data.y_test) ** 2)),
                    "test_mse_clean": float(np.mean((pred - data.f_test) ** 2))})
    seconds = time.perf_counter() - t0
    return seconds, pd.DataFrame(ref).groupby("n")[["test_mse", "test_mse_clean"]].mean()


def main(argv=None):
    p = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    p.add_argument("--quick", action="store_true", help="sizes 256..2048 and 3 repeats")
    p.add_argument("--executor", default="processes", choices=("inprocess", "processes", "dask"))
    p.add_argument("--n-jobs", type=int, default=2)
    p.add_argument("--torch-threads", type=int, default=1)
    p.add_argument("--precision", default="auto", choices=("auto", "float32", "bfloat16"))
    p.add_argument("--no-reference", action="store_true", help="skip the scikit-learn loop")
    args = p.parse_args(argv)

    from manireg.curves.learners import LearnerSpec
    from manireg.curves.campaign import Campaign
    from manireg.data.manifolds import graph_manifold
    from manireg.data.targets import make_regression

    sizes = [256, 512, 1024, 2048] if args.quick else [256, 512, 1024, 2048, 4096, 8192]
    repeats = 3 if args.quick else 5
    test_size = 2048
    sample = make_regression(graph_manifold(sizes[-1] + test_size, 3, 64, seed=0), 1.0, noise_std=0.1, seed=1)
    store = os.path.join(tempfile.mkdtemp(prefix="bench-campaign-"), "campaign.sqlite")
    net = LearnerSpec("net", params={} if args.precision == "auto" else {"precision": args.precision})
    campaign = Campaign.from_regression_sample(sample, sizes=sizes, repeats=repeats, test_size=test_size, seed=0,
                                         name="bench", store=store, learners=[net])
    print(f"grid: sizes {sizes}, {repeats} repeats, D=64, d=3, {len(campaign.cells())} cells; "
          f"executor={args.executor}, n_jobs={args.n_jobs}, torch_threads={args.torch_threads}")

    arrivals = []  # (seconds since start when a unit's rows arrived, that unit's longest training time)
    t0 = time.perf_counter()
    res = campaign.run(executor=args.executor, n_jobs=args.n_jobs, torch_threads=args.torch_threads, progress=True,
                    on_unit=lambda rows: arrivals.append((time.perf_counter() - t0,
                                                          max(r["seconds"] or 0.0 for r in rows))))
    t_ours = time.perf_counter() - t0
    # the first unit of each worker started after the worker's start-up (spawn, imports, data transfer)
    print(f"\nworker start-up (first arrival minus its training time): "
          f"{min(a - s for a, s in arrivals):.1f} s; units: {len(arrivals)}")

    import pandas as pd

    ours = res.rows.groupby("n")[["test_mse", "test_mse_clean"]].mean()
    table = ours.add_suffix("_manireg")
    table["precision"] = res.rows.groupby("n")["precision"].agg(lambda s: ",".join(sorted(set(s))))
    table["train_s"] = res.rows.groupby("n")["seconds"].max()
    table["stops_manireg"] = res.rows.groupby("n")["stop_reason"].agg(
        lambda s: ",".join(sorted({str(v) for v in s if isinstance(v, str)})))
    table["failed_manireg"] = res.rows.groupby("n")["status"].agg(lambda s: int((s != "ok").sum()))
    if args.no_reference:
        print(f"\nmanireg: {t_ours:.1f} s (no reference run)")
    else:
        t_ref, theirs = sklearn_loop(campaign)
        table = table.join(theirs.add_suffix("_sklearn"))
        print(f"\nmanireg: {t_ours:.1f} s   sklearn MLPRegressor one cell at a time: {t_ref:.1f} s   "
              f"ratio {t_ref / t_ours:.2f}x")
    print(f"noise variance {sample.noise_variance:.4f}")
    with pd.option_context("display.width", 160, "display.float_format", "{:.4f}".format):
        print(table.to_string())
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
