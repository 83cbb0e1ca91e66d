"""End-to-end time of a standard learning-curve campaign: manireg's executor against one-cell-at-a-time sklearn.

Campaign: ``graph_manifold(N, d=3, ambient_dim=64, seed=0)`` with ``make_regression(smoothness=1,
noise_std=0.1, seed=1)``; sizes 256, 512, ..., 8192 (6 sizes), 5 repeats, a fixed test set of 2048 rows.

* manireg: ``Campaign(...).run(executor=..., n_jobs=c, torch_threads=1)`` with the default net learner (sized
  by ``size_network``, default ``TrainConfig`` but the arithmetic given by ``--precision``); the repeats of
  each n are one ``BatchedTrainer.fit`` call. Run once per core setting of ``--cores`` (``c`` worker
  processes of one torch thread each; 1 core runs in process), each setting of several cores twice: a first
  campaign (new workers) and a second campaign with its own name in the same session (joblib reuses the
  workers).
* reference: the same cells (same nested training sets of size n, same test set) run one after another with
  ``sklearn.neural_network.MLPRegressor(hidden_layer_sizes=spec.hidden_sizes, early_stopping=True,
  validation_fraction=0.2, random_state=seed)`` on standardised inputs, i.e. the same hidden sizes and the
  same 20 % validation share for early stopping. Single-threaded: BLAS is pinned to one thread with
  ``threadpoolctl.threadpool_limits(1, "blas")`` (threadpoolctl comes with scikit-learn).

Printed, in one run: a row per (core setting, first/second campaign) with the wall time (data generation
excluded, store writes included; torch is already imported here when the campaign is built, as the net
learner sizes its nets, so the in-process runs pay no import inside the timed part), the ratio sklearn /
manireg (> 1: manireg faster), the load average before and after, and the time split (worker start-up,
training, store, the rest); a per-n table of mean test errors (manireg's rows are the same bit for bit in
every setting; checked) with "equal or lower error"; and a GOALS block with MET or SHORTFALL and the
measured cause. The machine may be shared with other jobs: the load average beside each figure says how
busy it was.

Run::

    python tests/benchmarks/bench_campaign.py                   # the full grid, float32, 1 / 2 / all cores
    python tests/benchmarks/bench_campaign.py --quick           # sizes 256..2048 (4 sizes), 3 repeats
    python tests/benchmarks/bench_campaign.py --quick --cores all --executor processes   # the old default

bfloat16 is measured (a row at all cores) only on a CPU that multiplies it natively
(``manireg.nets.training.native_bfloat16()``); otherwise the GOALS block says it was not measured and why.
"""

from __future__ import annotations

import argparse
import os
import tempfile
import time

import numpy as np

GOALS = {"standard": 10.0, "quick": 4.0}


def sklearn_loop(campaign):
    """The campaign's cells one after another with scikit-learn's MLPRegressor (same hidden sizes, same rows,
    early stopping on 20 %, standardised inputs), BLAS pinned to one thread; returns (seconds, per-n means)."""
    import pandas as pd
    from sklearn.neural_network import MLPRegressor
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler
    from threadpoolctl import threadpool_limits

    from manireg.curves.learners import make_learner

    data = campaign.data
    net = make_learner(data.learners[0])
    ref = []
    with threadpool_limits(limits=1, user_api="blas"):
        t0 = time.perf_counter()
        for c in campaign.cells():
            arch = net.architecture(c.n, data)
            fit_rows, val_rows = data.cell_rows(c)
            rows = np.concatenate([fit_rows, val_rows])
            model = make_pipeline(StandardScaler(), MLPRegressor(hidden_layer_sizes=arch.hidden_sizes,
                                                                 early_stopping=True, validation_fraction=0.2,
                                                                 random_state=c.seed % 2**31))
            model.fit(data.X[rows], data.y[rows])
            pred = model.predict(data.X_test)
            ref.append({"n": c.n, "repeat": c.repeat, "test_mse": float(np.mean((pred - data.y_test) ** 2)),
                        "test_mse_clean": float(np.mean((pred - data.f_test) ** 2))})
        seconds = time.perf_counter() - t0
    return seconds, pd.DataFrame(ref).groupby("n")[["test_mse", "test_mse_clean"]].mean()


def run_manireg(make, name, executor, cores):
    """One campaign run; returns wall seconds, rows and the time split."""
    campaign = make(name)
    store_s = [0.0]
    put = campaign.store.put

    def timed_put(row):
        t = time.perf_counter()
        put(row)
        store_s[0] += time.perf_counter() - t

    campaign.store.put = timed_put
    arrivals = []  # (seconds since start when a unit's rows arrived, that unit's training seconds)
    load0 = os.getloadavg()
    t0 = time.perf_counter()
    res = campaign.run(executor=executor, n_jobs=cores, torch_threads=1, progress=False,
                       on_unit=lambda rows: arrivals.append((time.perf_counter() - t0,
                                                             max(r["seconds"] or 0.0 for r in rows))))
    wall = time.perf_counter() - t0
    load1 = os.getloadavg()
    ran = res.summary.get("executor")
    workers = cores if ran in ("processes", "dask") else 1
    # start-up: the first unit to arrive began this long after the start (spawn, imports, data; in process:
    # the torch import and the data preparation); training: the units' training seconds per worker
    startup = max(0.0, min(a - s for a, s in arrivals))
    training = sum(s for _, s in arrivals) / workers
    split = {"startup": startup, "training": training, "store": store_s[0],
             "rest": max(0.0, wall - startup - training - store_s[0])}
    return {"wall": wall, "rows": res.rows, "executor": ran, "reason": res.summary.get("executor_reason", ""),
            "split": split, "load": (load0[0], load1[0]), "units": len(arrivals), "workers": workers}


def fmt_split(s):
    return (f"start-up {s['startup']:.1f} s, training {s['training']:.1f} s/worker, store {s['store']:.2f} s, "
            f"rest {s['rest']:.1f} s")


def main(argv=None):
    p = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    p.add_argument("--quick", action="store_true", help="sizes 256..2048 and 3 repeats")
    p.add_argument("--executor", default="auto", choices=("auto", "inprocess", "processes", "dask"))
    p.add_argument("--cores", nargs="+", default=["1", "2", "all"],
                   help="core settings of the manireg side: numbers or 'all' (worker processes, 1 torch thread each)")
    p.add_argument("--precision", default="float32", choices=("auto", "float32", "bfloat16"))
    p.add_argument("--no-second", action="store_true", help="skip the second campaign (warm workers) per setting")
    p.add_argument("--no-reference", action="store_true", help="skip the scikit-learn loop")
    args = p.parse_args(argv)

    import pandas as pd

    from manireg.curves.campaign import Campaign
    from manireg.curves.learners import LearnerSpec
    from manireg.data.manifolds import graph_manifold
    from manireg.data.targets import make_regression

    all_cores = os.cpu_count() or 1
    settings = []
    for c in args.cores:
        n = all_cores if c == "all" else int(c)
        if n not in settings:
            settings.append(n)
    grid = "quick" if args.quick else "standard"
    sizes = [256, 512, 1024, 2048] if args.quick else [256, 512, 1024, 2048, 4096, 8192]
    repeats = 3 if args.quick else 5
    test_size = 2048
    sample = make_regression(graph_manifold(sizes[-1] + test_size, 3, 64, seed=0), 1.0, noise_std=0.1, seed=1)
    folder = tempfile.mkdtemp(prefix="bench-campaign-")

    def maker(precision):
        def make(name):
            return Campaign.from_regression_sample(
                sample, sizes=sizes, repeats=repeats, test_size=test_size, seed=0, name=name,
                store=os.path.join(folder, name + ".sqlite"),
                learners=[LearnerSpec("net", params={"precision": precision})])
        return make

    make = maker(args.precision)
    first = make("bench")
    print(f"grid {grid}: sizes {sizes}, {repeats} repeats, D=64, d=3, {len(first.cells())} cells; "
          f"precision={args.precision}; executor={args.executor}; core settings {settings} "
          f"(this machine has {all_cores} cores: 'all' = {all_cores}); torch_threads=1 per worker")
    print("the machine may be shared with other jobs: load averages (1 min) are printed beside each figure")

    runs = []
    for cores in settings:
        # a second campaign shows warm workers; one core runs in process, where there are none to keep warm
        for which in ("first", "second")[: 1 if args.no_second or cores == 1 else 2]:
            r = run_manireg(make, f"bench-{cores}-{which}", args.executor, cores)
            r.update(cores=cores, which=which, precision=args.precision)
            runs.append(r)
            print(f"  {cores} core(s), {which} campaign: {r['wall']:.1f} s on {r['executor']} "
                  f"({r['units']} units; {fmt_split(r['split'])}); load {r['load'][0]:.2f} -> {r['load'][1]:.2f}"
                  + (f"; auto: {r['reason']}" if r["reason"] else ""))

    from manireg.nets.training import native_bfloat16

    bf16_note = None
    if args.precision != "bfloat16":
        if native_bfloat16():
            r = run_manireg(maker("bfloat16"), "bench-bf16", args.executor, all_cores)
            r.update(cores=all_cores, which="first", precision="bfloat16")
            runs.append(r)
        else:
            bf16_note = ("not measured: this CPU has no native bfloat16 (manireg.nets.training.native_bfloat16() "
                         "is False), so the trainer would emulate it and a figure would say nothing about the goal")

    # keys hold the campaign's name, so the runs are compared cell by cell on (n, repeat)
    def numbers(rows):
        return rows.sort_values(["n", "repeat"])[["n", "repeat", "test_mse", "val_mse", "steps"]].to_numpy()

    same = all(np.array_equal(numbers(runs[0]["rows"]), numbers(r["rows"]))
               for r in runs if r["precision"] == args.precision)
    ours = runs[0]["rows"]
    table = ours.groupby("n")[["test_mse", "test_mse_clean"]].mean().add_suffix("_manireg")
    t_ref, load_ref = None, None
    if not args.no_reference:
        l0 = os.getloadavg()[0]
        t_ref, theirs = sklearn_loop(first)
        load_ref = (l0, os.getloadavg()[0])
        table = table.join(theirs.add_suffix("_sklearn"))
        table["equal_or_lower"] = np.where(table["test_mse_manireg"] <= table["test_mse_sklearn"], "yes", "no")
        print(f"\nsklearn MLPRegressor one cell at a time (BLAS pinned to 1 thread): {t_ref:.1f} s; "
              f"load {load_ref[0]:.2f} -> {load_ref[1]:.2f}")
    # the share of manireg's training seconds spent at each n (one replica's seconds = its unit's fit time)
    units = ours.groupby(["n", "seconds"]).size().reset_index()
    table["train_share"] = units.groupby("n")["seconds"].sum() / units["seconds"].sum()
    table["stops_manireg"] = ours.groupby("n")["stop_reason"].agg(
        lambda s: ",".join(sorted({str(v) for v in s if isinstance(v, str)})))
    print(f"\nper n (noise variance {sample.noise_variance:.4f}; manireg rows identical in every "
          f"{args.precision} setting: {'yes' if same else 'NO'})")
    with pd.option_context("display.width", 180, "display.float_format", "{:.4f}".format):
        print(table.to_string())

    print("\nruns")
    print(f"{'cores':>5} {'campaign':>8} {'precision':>9} {'executor':>10} {'manireg s':>9} {'ratio':>7} "
          f"{'load':>11}  time split")
    for r in runs:
        ratio = f"{t_ref / r['wall']:.2f}x" if t_ref else "-"
        print(f"{r['cores']:>5} {r['which']:>8} {r['precision']:>9} {r['executor']:>10} {r['wall']:>9.1f} "
              f"{ratio:>7} {r['load'][0]:>5.2f}/{r['load'][1]:<5.2f}  {fmt_split(r['split'])}")

    print("\nGOALS")
    goal = GOALS[grid]
    lower_everywhere = bool(t_ref) and (table["equal_or_lower"] == "yes").all()
    if not t_ref:
        print("  no reference run (--no-reference): no ratio, no goal checked")
        return 0
    print(f"  error: equal or lower than sklearn at every n: {'MET' if lower_everywhere else 'SHORTFALL'} "
          f"(no at n = {[int(n) for n in table.index[table['equal_or_lower'] == 'no']]})")
    for r in runs:
        ratio = t_ref / r["wall"]
        verdict = "MET" if ratio >= goal and lower_everywhere else "SHORTFALL"
        line = (f"  {grid} grid, {r['precision']}, {r['cores']} core(s), {r['which']} campaign: >= {goal:g}x -> "
                f"{ratio:.2f}x {verdict}")
        if verdict == "SHORTFALL" and ratio < goal:
            need = t_ref / goal
            s = r["split"]
            line += (f" (needs <= {need:.1f} s, took {r['wall']:.1f} s: {fmt_split(s)}; "
                     f"without start-up {t_ref / max(r['wall'] - s['startup'], 1e-9):.2f}x)")
        print(line)
    if bf16_note:
        print(f"  {grid} grid, bfloat16: {bf16_note}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
