"""The ``manireg`` command line. Thin: it parses arguments, calls core functions and prints their results.

Commands: ``demo``, ``geometry``, ``campaign``, ``plan``, ``report``. Every command returns an exit code:
0 on success, 2 with a one-line reason on bad input (never a traceback for a user error), 130 when
interrupted (finished cells are kept in the store; running again resumes).
"""

from __future__ import annotations

import argparse
import json
import math
import os
import sys
import warnings

__all__ = ["main", "build_parser"]


class UsageError(Exception):
    """Bad input from the user: printed as one line, exit code 2."""


# ----------------------------------------------------------------------------------------------- helpers
def _out_dir(path: str) -> str:
    try:
        os.makedirs(path, exist_ok=True)
    except OSError as exc:
        raise UsageError(f"cannot create output folder '{path}': {exc.strerror}. Pass a writable --out folder.") from None
    probe = os.path.join(path, ".manireg-write-test")
    try:
        with open(probe, "w") as fh:
            fh.write("")
        os.remove(probe)
    except OSError as exc:
        raise UsageError(f"output folder '{path}' is not writable ({exc.strerror}). Pass a writable --out folder.") from None
    return path


def _write_json(path: str, data: dict) -> None:
    from ._results import to_jsonable

    with open(path, "w") as fh:
        json.dump(to_jsonable(data), fh, indent=2, allow_nan=False)


def _progress_steps(steps, enabled: bool, desc: str):
    """A tqdm bar over named steps; returns (callback, close)."""
    from tqdm.auto import tqdm

    bar = tqdm(total=len(steps), desc=desc, disable=not enabled, leave=False, file=sys.stderr)

    def callback(name):
        bar.set_postfix_str(name)
        if bar.n < bar.total and getattr(callback, "started", False):
            bar.update(1)
        callback.started = True

    def close():
        bar.update(bar.total - bar.n)
        bar.close()

    return callback, close


def _load(path: str, target: str | None):
    from .data import load_table

    table = load_table(path, target=target)
    if target is not None and table.y is None:
        raise UsageError(f"no target column in '{path}'; pass --target COL.")
    return table


def _geometry(X, y, *, seed: int, embed: bool, dimension=None, radius=None, progress: bool = True, n_boot: int = 200):
    from .geometry import GEOMETRY_STEPS, describe_geometry

    steps = GEOMETRY_STEPS if embed else GEOMETRY_STEPS[:-1]
    cb, close = _progress_steps(steps, progress, "geometry")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        geo = describe_geometry(X, y, dimension=dimension, radius=radius, embed=embed, seed=seed, callback=cb, n_boot=n_boot)
    close()
    return geo, sorted({str(w.message) for w in caught})


def _print_warnings(messages):
    for m in messages:
        print(f"note: {m}")


def _parse_learners(names, width_multipliers, precision="auto"):
    from .curves import LearnerSpec

    specs = []
    extra = {} if precision == "auto" else {"precision": precision}
    for name in names:
        if name == "net":
            for m in width_multipliers or [1.0]:
                specs.append(LearnerSpec("net", params={"width_multiplier": float(m), **extra}))
        else:
            specs.append(LearnerSpec(name))
    return specs


def _floor_settings(result, floor):
    """``(floor, extra fit keywords)`` for a --floor choice: "known" is the known noise variance of synthetic
    data; "estimate" uses it too when known, else the campaign's noise estimate; "fit" and None pass through."""
    if floor == "known":
        if result.noise_variance is None:
            raise UsageError("--floor known needs data with a known noise variance (synthetic data); use --floor estimate or fit.")
        return float(result.noise_variance), {}
    if floor == "estimate":
        nv = result.noise_variance if result.noise_variance is not None else result.noise_estimate
        if nv is None:
            raise UsageError("--floor estimate needs a noise estimate, and none is recorded for this campaign; use --floor fit.")
        return floor, {"noise_variance": float(nv)}
    return floor, {}


def _read_out(result, *, smoothness_range, target_error, floor, allow_unverified, seed):
    """Fit every learner, run the extrapolation check, plan for the target error (or a default target), print
    the fits and the plan, and return the parts of the report (fits, extrapolation, plan, plan_note, sizing)."""
    from .curves import extrapolation_check, fit_all, plan_samples
    from .theory import sizing_table

    fl, extra = _floor_settings(result, floor)
    kw = dict(smoothness=smoothness_range or result.s, dimension=result.d, ambient_dim=result.D, seed=seed, **extra)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        fits = fit_all(result.rows, floor=fl, **kw)
        checks = []
        for f in fits:
            if f.n_sizes >= 4:
                checks.append(extrapolation_check(result.rows, f.learner, floor=fl, **kw))
    # the plan: best measured learner (lowest error at the largest size)
    measured = [f for f in fits if f.verdict == "measured"]
    pool = measured or ([f for f in fits if math.isfinite(f.exponent) and f.exponent > 0] if allow_unverified else [])
    plan, note = None, None
    if not pool:
        note = ("No plan: no learner's curve earned a measured exponent over this range "
                "(see the verdicts); pass --allow-unverified to plan from an unverified curve anyway.")
    else:
        best = min(pool, key=lambda f: f.mean_errors[-1])
        target = target_error
        if target is None:  # default: halve the excess error at the largest size
            target = best.floor + 0.5 * (float(best.predict(best.n_range[1])) - best.floor)
        try:
            plan = plan_samples(best, target, allow_unverified=allow_unverified, dimension=result.d,
                                smoothness=result.s, input_dim=result.D)
        except ValueError as exc:
            note = f"No plan for target error {target:.4g}: {exc}"
        if plan is not None and target_error is None:
            note = "Target error not given: the plan halves the fitted excess error at the largest measured size."
    print()
    for f in fits:
        print(str(f))
    if plan is not None:
        print()
        print("plan: " + str(plan))
    if note:
        print(note)
    _print_warnings(sorted({str(w.message) for w in caught}))
    sizing = sizing_table(sorted(set(int(n) for n in result.rows["n"])), result.d, result.s, result.D)
    return {"fits": fits, "extrapolation": checks, "plan": plan, "plan_note": note, "sizing": sizing}


def _write_report(out, title, **parts):
    from .report import compose_report, write_report

    sections, summary = compose_report(title=title, **parts)
    return write_report(out, title, sections, summary)


# ---------------------------------------------------------------------------------------------- commands
def cmd_geometry(args) -> int:
    from .plots import plot_chart_counts, plot_dimension_profile, plot_spectra

    table = _load(args.data, args.target)
    out = _out_dir(args.out)
    geo, notes = _geometry(table.X, table.y, seed=args.seed, embed=not args.no_embed, dimension=args.dimension,
                           radius=args.radius, progress=not args.quiet)
    print(str(geo))
    _print_warnings(notes)
    _write_json(os.path.join(out, "geometry.json"), geo.to_dict())
    figs = {"dimension_profile.png": plot_dimension_profile(geo.dimension), "chart_spectra.png": plot_spectra(geo.atlas),
            "chart_counts.png": plot_chart_counts(geo.chart_counts)}
    if geo.embedding is not None:
        from .plots import plot_embedding

        rows = geo.embedding.rows
        vals = geo.target[rows] if geo.target is not None else geo.assignments[rows]
        figs["view.png"] = plot_embedding(geo.embedding, vals, kind="target" if geo.target is not None else "chart")
    import matplotlib.pyplot as plt

    for name, fig in figs.items():
        fig.savefig(os.path.join(out, name), dpi=110, bbox_inches="tight")
        plt.close(fig)
    print(f"\nwritten: {os.path.join(out, 'geometry.json')} and {len(figs)} figures in {out}")
    return 0


def _smoothness(args):
    if args.smoothness_range is not None:
        lo, hi = args.smoothness_range
        if not (0 < lo <= hi):
            raise UsageError(f"--smoothness-range needs 0 < A <= B; got {lo} {hi}.")
        return 0.5 * (lo + hi), (lo, hi)
    if args.smoothness is not None and args.smoothness <= 0:
        raise UsageError(f"--smoothness must be > 0; got {args.smoothness}.")
    return args.smoothness, None


def cmd_campaign(args) -> int:
    from .curves import Campaign

    if args.workers is not None and args.scheduler is not None:
        raise UsageError("pass --workers N (local processes) or --scheduler ADDRESS (dask cluster), not both.")
    if args.repeats < 1:
        raise UsageError(f"--repeats must be >= 1; got {args.repeats}.")
    s, s_range = _smoothness(args)
    table = _load(args.data, args.target)
    out = _out_dir(args.out)
    geo = None
    if not args.no_geometry:
        geo, notes = _geometry(table.X, table.y, seed=args.seed, embed=not args.no_embed, progress=not args.quiet)
        print(str(geo.dimension))
        _print_warnings(notes)
    d = args.dimension if args.dimension is not None else (None if geo is None else max(1.0, round(float(geo.dimension.consensus), 2)))
    store = args.store or os.path.join(out, "campaign.sqlite")
    campaign = Campaign(X=table.X, y=table.y, sizes=args.sizes, repeats=args.repeats,
                  learners=_parse_learners(args.learners, args.width_multipliers, args.precision), d=d, s=s, seed=args.seed,
                  label=args.label, store=store)
    extra = {"source": args.data}
    if geo is not None:
        extra["geometry"] = geo.to_dict()
    executor = "dask" if args.scheduler else ("processes" if args.workers else "inprocess")
    print(f"campaign '{args.label}': {len(campaign.cells())} cells (sizes {campaign.data.sizes}, {args.repeats} repeats), store {campaign.store.path}")
    result = campaign.run(executor=executor, n_jobs=args.workers, scheduler=args.scheduler, progress=not args.quiet,
                       metadata=extra)
    print(f"noise variance estimate (first-neighbour): {result.noise_estimate:.4g}")
    parts = _read_out(result, smoothness_range=s_range, target_error=args.target_error, floor=args.floor,
                      allow_unverified=args.allow_unverified, seed=args.seed)
    paths = _write_report(out, f"manireg campaign: {os.path.basename(args.data)}",
                          data={"source": args.data, "target": args.target, "n_samples": table.n_samples, "ambient_dim": table.X.shape[1]},
                          geometry=geo, campaign=result, **parts,
                          settings={"seed": args.seed, "sizes": campaign.data.sizes, "repeats": args.repeats, "learners": args.learners,
                                    "width_multipliers": args.width_multipliers, "precision": args.precision,
                                    "smoothness": s_range or s, "dimension": result.d,
                                    "dimension_source": result.d_source, "floor": args.floor, "store": campaign.store.path})
    print(f"\nreport: {paths['html']}\nsummary: {paths['summary']}")
    return 0


def cmd_plan(args) -> int:
    from .curves import Campaign, fit_exponent, plan_samples
    from .theory import ambient_exponent, regression_exponent, sizing_table

    if args.target_error is not None and args.target_error <= 0:
        raise UsageError(f"--target-error must be > 0; got {args.target_error}.")
    if args.from_store:
        if not os.path.exists(args.from_store):
            raise UsageError(f"no store at '{args.from_store}'. Pass the --store file a campaign was run with.")
        result = Campaign.from_store(args.from_store, args.campaign)
        d = args.dimension if args.dimension is not None else result.d
        s = args.smoothness if args.smoothness is not None else result.s
        learners = sorted(set(result.rows["learner"]))
        learner = args.learner or (learners[0] if len(learners) == 1 else None)
        if learner is None:
            raise UsageError(f"the store holds learners {learners}; pass --learner NAME.")
        fl, kw = _floor_settings(result, args.floor)
        fit = fit_exponent(result.rows, learner, floor=fl, smoothness=s, dimension=d, ambient_dim=result.D, seed=args.seed, **kw)
        print(str(fit))
        if args.target_error is None:
            raise UsageError("pass --target-error e to plan from the stored curve.")
        plan = plan_samples(fit, args.target_error, allow_unverified=args.allow_unverified, dimension=d, smoothness=s, input_dim=result.D)
        print("\nplan: " + str(plan))
        if plan.architecture:
            a = plan.architecture
            print(f"network at n = {plan.architecture_n}: depth {a['depth']}, width {a['width']}, nonzero budget {a['nonzero_budget']}, "
                  f"{a['n_parameters']} parameters")
        return 0
    if args.dimension is None or args.smoothness is None:
        raise UsageError("pass --dimension d and --smoothness s (or --from-store FILE with a finished campaign).")
    D = args.input_dim if args.input_dim is not None else max(1, int(math.ceil(args.dimension)))
    if D < args.dimension:
        raise UsageError(f"--input-dim ({D}) must be >= --dimension ({args.dimension}).")
    b = regression_exponent(args.dimension, args.smoothness)
    print(f"predicted exponent 2s/(2s+d) = {b:.4f} (d = {args.dimension:g}, s = {args.smoothness:g})"
          + (f"; ambient 2s/(2s+D) = {ambient_exponent(D, args.smoothness):.4f} (D = {D})" if args.input_dim else ""))
    print(f"error ~ C n^-{b:.3f}: halving the error needs {2 ** (1 / b):.3g}x the samples, a tenth needs {10 ** (1 / b):.3g}x.")
    if args.target_error is not None:
        print("the constant C is not known without a measured curve: run a campaign and use --from-store to turn "
              f"--target-error {args.target_error:g} into a number of samples with an interval.")
    table = sizing_table(args.n if args.n else [1e2, 1e3, 1e4, 1e5], args.dimension, args.smoothness, D)
    print()
    print(table.to_frame().to_string(index=False, float_format=lambda v: f"{v:.4g}"))
    return 0


def cmd_report(args) -> int:
    from .curves import Campaign
    from .curves.store import ResultStore

    if not os.path.exists(args.store):
        raise UsageError(f"no store at '{args.store}'. Pass the --store file a campaign was run with.")
    out = _out_dir(args.out)
    result = Campaign.from_store(args.store, args.campaign)
    if not len(result.rows):
        raise UsageError(f"campaign '{result.label}' in '{args.store}' has no rows yet; run the campaign first.")
    meta = ResultStore(args.store).campaign_meta(result.label)
    s_range = tuple(args.smoothness_range) if args.smoothness_range else None
    parts = _read_out(result, smoothness_range=s_range, target_error=args.target_error, floor=args.floor,
                      allow_unverified=args.allow_unverified, seed=args.seed)
    paths = _write_report(out, f"manireg campaign '{result.label}' (rebuilt from its store)",
                          data={"source": meta.get("source", "(recorded in the store)"), "n_samples": meta.get("n_total"),
                                "ambient_dim": result.D, "fingerprint": meta.get("fingerprint")},
                          geometry=meta.get("geometry"), campaign=result, **parts, settings={"store": args.store, "spec": result.spec, "floor": args.floor, "seed": args.seed})
    print(f"\nreport: {paths['html']}\nsummary: {paths['summary']}")
    return 0


def cmd_demo(args) -> int:
    from .curves import LearnerSpec, Campaign
    from .data import pebble_scenario

    out = _out_dir(args.out)
    if args.quick:
        n, sizes, repeats, embed, n_boot = 1400, [80, 160, 320, 640, 1000], 3, False, 100
        net = {"max_steps": 1500}
    else:
        n, sizes, repeats, embed, n_boot = 6500, [125, 250, 500, 1000, 2000, 4000], 5, True, 200
        net = {}
    reg = pebble_scenario(n, seed=args.seed)
    m = reg.manifold
    print(f"demo scenario: {n} renderings of the pebble, {m.image_shape[0]}x{m.image_shape[1]} pixels (D = {m.ambient_dim}); "
          f"truth: d = {m.dimension}, target smoothness s = {reg.smoothness}, noise variance {reg.noise_variance:g}")
    geo, notes = _geometry(reg.X, reg.y, seed=args.seed, embed=embed, progress=not args.quiet, n_boot=n_boot)
    print()
    print(str(geo))
    _print_warnings(notes)
    d_hat = max(1.0, round(float(geo.dimension.consensus), 2))
    store = os.path.join(out, "campaign.sqlite")
    campaign = Campaign.from_regression_sample(reg, sizes=sizes, repeats=repeats, d=d_hat, seed=args.seed, label="demo",
                                         learners=[LearnerSpec("net", params=net), LearnerSpec("knn")], store=store)
    print(f"\ncampaign: {len(campaign.cells())} cells (sizes {sizes}, {repeats} repeats, learners net and knn), "
          f"sized with the estimated d = {d_hat:g} and s = {reg.smoothness}; store {campaign.store.path}")
    result = campaign.run(progress=not args.quiet, metadata={"geometry": geo.to_dict(), "source": "built-in pebble scenario"})
    # the demo shows a plan even from an unverified curve; the plan then carries its warning in plain words
    # (``manireg campaign`` refuses unless --allow-unverified is given)
    parts = _read_out(result, smoothness_range=None, target_error=None, floor="known", allow_unverified=True, seed=args.seed)
    paths = _write_report(out, "manireg demo: pebble renderings",
                          data={"source": "built-in pebble scenario (manireg.data.pebble_scenario)", "n_samples": n,
                                "ambient_dim": m.ambient_dim, "true_dimension": m.dimension, "smoothness": reg.smoothness,
                                "noise_variance": reg.noise_variance},
                          geometry=geo, campaign=result, **parts,
                          settings={"seed": args.seed, "quick": args.quick, "sizes": sizes, "repeats": repeats,
                                    "dimension_used": d_hat, "floor": "known noise variance", "store": campaign.store.path},
                          true_dimension=m.dimension)
    print(f"\nreport: {paths['html']}\nsummary: {paths['summary']}")
    return 0


# ------------------------------------------------------------------------------------------------ parser
def build_parser() -> argparse.ArgumentParser:
    from . import __version__

    parser = argparse.ArgumentParser(
        prog="manireg",
        description="Intrinsic geometry, network sizing and learning-curve campaigns for regression on data near a manifold.",
    )
    parser.add_argument("--version", action="version", version=f"manireg {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")

    def common(p, out_default):
        p.add_argument("--out", default=out_default, help="output folder (default: %(default)s)")
        p.add_argument("--seed", type=int, default=0, help="seed of every random step (default: %(default)s)")
        p.add_argument("--quiet", action="store_true", help="no progress bars")

    p = sub.add_parser("demo", help="the whole job on the built-in pebble-image scenario, with a report")
    common(p, "manireg-out/demo")
    p.add_argument("--quick", action="store_true", help="small settings (about a minute)")
    p.set_defaults(func=cmd_demo)

    p = sub.add_parser("geometry", help="intrinsic dimension, charts, reach and curvature of a data file")
    p.add_argument("data", help="CSV, Parquet, NPZ or NPY file")
    p.add_argument("--target", help="target column (used to colour the 2-D view; left out of the geometry)")
    p.add_argument("--dimension", type=int, help="intrinsic dimension for charts and reach (default: the consensus estimate)")
    p.add_argument("--radius", type=float, help="chart radius (default: from the reach estimate)")
    p.add_argument("--no-embed", action="store_true", help="skip the 2-D view (UMAP)")
    common(p, "manireg-out/geometry")
    p.set_defaults(func=cmd_geometry)

    p = sub.add_parser("campaign", help="run or resume a learning-curve campaign on a data file and write its report")
    p.add_argument("data", help="CSV, Parquet, NPZ or NPY file")
    p.add_argument("--target", required=True, help="target column")
    g = p.add_mutually_exclusive_group()
    g.add_argument("--smoothness", type=float, help="Hölder smoothness s of the target (default 1)")
    g.add_argument("--smoothness-range", type=float, nargs=2, metavar=("A", "B"), help="a range of s: predictions become intervals")
    p.add_argument("--dimension", type=float, help="intrinsic dimension d (default: the consensus estimate)")
    p.add_argument("--sizes", type=int, nargs="+", help="training sizes (default: a geometric grid)")
    p.add_argument("--repeats", type=int, default=5, help="repeats per size (default: %(default)s)")
    p.add_argument("--learners", nargs="+", default=["net", "knn"], help="net, knn, kernel_ridge (default: net knn)")
    p.add_argument("--width-multipliers", type=float, nargs="+", help="several nets with these width multipliers (a capacity sweep)")
    p.add_argument("--precision", default="auto", choices=["auto", "float32", "bfloat16"],
                   help="arithmetic of the nets (default: %(default)s, bfloat16 where the CPU has it and the net is large; "
                        "float32 for noise-free data fitted very closely)")
    p.add_argument("--store", help="SQLite store (default: OUT/campaign.sqlite); re-running resumes")
    p.add_argument("--label", default="campaign", help="campaign name in the store (default: %(default)s)")
    g = p.add_mutually_exclusive_group()
    g.add_argument("--workers", type=int, help="local worker processes")
    g.add_argument("--scheduler", help="address of a dask.distributed scheduler")
    p.add_argument("--floor", default="estimate", choices=["estimate", "fit", "none"], help="error floor of the fits (default: %(default)s)")
    p.add_argument("--target-error", type=float, help="plan the samples for this test error")
    p.add_argument("--allow-unverified", action="store_true", help="plan even from a curve without a measured exponent")
    p.add_argument("--no-geometry", action="store_true", help="skip the geometry read-out (then give --dimension)")
    p.add_argument("--no-embed", action="store_true", help="skip the 2-D view")
    common(p, "manireg-out/campaign")
    p.set_defaults(func=cmd_campaign)

    p = sub.add_parser("plan", help="network sizing and samples for a target error")
    p.add_argument("--dimension", type=float, help="intrinsic dimension d")
    p.add_argument("--smoothness", type=float, help="Hölder smoothness s")
    p.add_argument("--target-error", type=float, help="test error to reach")
    p.add_argument("--input-dim", type=int, help="ambient dimension D (for sizing and the ambient exponent)")
    p.add_argument("--n", type=float, nargs="+", help="sample sizes for the sizing table (default 1e2 1e3 1e4 1e5)")
    p.add_argument("--from-store", help="plan from a finished campaign's measured curve")
    p.add_argument("--campaign", help="campaign label in the store")
    p.add_argument("--learner", help="learner whose curve to use")
    p.add_argument("--floor", default="estimate", choices=["estimate", "fit", "none", "known"])
    p.add_argument("--allow-unverified", action="store_true")
    p.add_argument("--seed", type=int, default=0)
    p.set_defaults(func=cmd_plan)

    p = sub.add_parser("report", help="rebuild the report of a campaign from its store, without training")
    p.add_argument("store", help="the campaign's SQLite store")
    p.add_argument("--campaign", help="campaign label (when the store holds several)")
    p.add_argument("--target-error", type=float)
    p.add_argument("--smoothness-range", type=float, nargs=2, metavar=("A", "B"))
    p.add_argument("--floor", default="estimate", choices=["estimate", "fit", "none", "known"])
    p.add_argument("--allow-unverified", action="store_true")
    common(p, "manireg-out/report")
    p.set_defaults(func=cmd_report)
    return parser


def main(argv=None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "func", None):
        parser.print_help()
        return 2
    if getattr(args, "floor", None) == "none":
        args.floor = None
    try:
        return args.func(args)
    except (UsageError, ValueError, FileNotFoundError) as exc:
        # validation errors from the core name the problem and the fix; keep them to one line
        msg = " ".join(str(exc).split())
        print(f"manireg {args.command}: error: {msg}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print(f"manireg {args.command}: interrupted; finished cells are kept in the store, run the same command again to resume.",
              file=sys.stderr)
        return 130


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
