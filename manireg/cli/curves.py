"""``manireg curves DATA --target COL``: run or resume a learning-curve campaign and write its report."""

from __future__ import annotations

import os

from ._common import (UsageError, add_data_options, add_floor_option, add_run_options, add_store_options, load,
                      out_dir, parse_floor_option, parse_sizing, say)
from ._readout import read_out, report_parts
from .report import write

HELP = "run or resume a learning-curve campaign on a data file and write its report"


def add_parser(sub):
    p = sub.add_parser("curves", help=HELP, description=HELP + ". Running the same command again resumes: "
                       "finished cells are read from the store, only missing ones are trained.")
    add_data_options(p, target_required=True)
    g = p.add_mutually_exclusive_group()
    g.add_argument("--smoothness", type=float, metavar="s",
                   help="Hölder smoothness s of the target (default: estimated from the data by local differences)")
    g.add_argument("--smoothness-range", type=float, nargs=2, metavar=("A", "B"), help="a range of s: predictions become intervals")
    p.add_argument("--dimension", type=float, metavar="d", help="intrinsic dimension d (default: the geometry read-out's consensus)")
    p.add_argument("--sizes", type=int, nargs="+", metavar="N", help="training sizes (default: a geometric grid)")
    p.add_argument("--repeats", type=int, default=5, metavar="R", help="repeats per size (default: %(default)s)")
    p.add_argument("--learners", nargs="+", default=["net", "knn"], choices=["net", "knn", "kernel_ridge"],
                   metavar="LEARNER", help="net, knn, kernel_ridge (default: net knn)")
    p.add_argument("--width-multipliers", type=float, nargs="+", metavar="M",
                   help="extra nets with these multiples of the rule's width (a capacity sweep; the rule's own width is always included)")
    p.add_argument("--sizing", nargs="+", metavar="NAME=VALUE", help="sizing constants of the nets, e.g. c_width=4 width_max=1024")
    p.add_argument("--precision", default="auto", choices=["auto", "float32", "bfloat16"],
                   help="arithmetic of the nets (default: %(default)s: bfloat16 where the CPU has it and the net is large; "
                        "float32 for noise-free data fitted very closely)")
    add_store_options(p, required=False, default_hint="OUT/campaign.sqlite")
    g = p.add_mutually_exclusive_group()
    g.add_argument("--workers", type=int, metavar="N", help="local worker processes")
    g.add_argument("--scheduler", metavar="ADDRESS", help="address of a dask.distributed scheduler")
    add_floor_option(p)
    p.add_argument("--target-error", type=float, metavar="E", help="plan the samples for this test error")
    p.add_argument("--allow-unverified", action="store_true", help="plan even from a curve without a measured exponent")
    p.add_argument("--no-geometry", action="store_true", help="skip the geometry read-out (needs --dimension)")
    p.add_argument("--no-view", action="store_true", help="skip the 2-D view in the geometry read-out")
    add_run_options(p, "manireg-out/curves")
    p.set_defaults(func=run)
    return p


def learner_specs(names, width_multipliers=None, precision="auto", sizing=None):
    """LearnerSpecs for the command line's learners; the net at the rule's width comes first, then each
    extra width multiplier."""
    from ..curves import LearnerSpec

    extra = {} if precision == "auto" else {"precision": precision}
    if sizing:
        extra["constants"] = dict(sizing)
    specs = []
    for name in names:
        if name == "net":
            mults = [1.0] + [float(m) for m in (width_multipliers or []) if float(m) != 1.0]
            for m in dict.fromkeys(mults):
                specs.append(LearnerSpec("net", params={"width_multiplier": m, **extra}))
        else:
            specs.append(LearnerSpec(name))
    return specs


def smoothness_choice(args):
    if args.smoothness_range is not None:
        lo, hi = args.smoothness_range
        if not (0 < lo <= hi):
            raise UsageError(f"--smoothness-range needs 0 < A <= B; got {lo:g} {hi:g}.")
        return 0.5 * (lo + hi), (lo, hi)
    if args.smoothness is not None and args.smoothness <= 0:
        raise UsageError(f"--smoothness must be > 0; got {args.smoothness:g}.")
    return args.smoothness, None


def estimated_smoothness(X, y, seed) -> float:
    """s from local differences (:func:`manireg.curves.smoothness.estimate_smoothness`), said in one line."""
    from ..curves.smoothness import estimate_smoothness

    try:
        est = estimate_smoothness(X, y, seed=seed)
    except ValueError as exc:
        say(f"smoothness not given and not estimable ({exc}); using s = 1 (Lipschitz); pass --smoothness to set it")
        return 1.0
    lo, hi = est.interval
    note = "; at most 1 is visible, so read it as s >= %.2f" % lo if est.saturated else ""
    say(f"smoothness not given: estimated s = {est.smoothness:.2f} [95% interval {lo:.2f}, {hi:.2f}] from local "
        f"differences of the target{note}; pass --smoothness to set it")
    return float(est.smoothness)


def run(args) -> int:
    from ..curves import Campaign
    from ..curves.sweep import check_sizes
    from ..geometry import working_dimension
    from .geometry import describe

    if args.repeats < 1:
        raise UsageError(f"--repeats must be >= 1; got {args.repeats}.")
    if args.no_geometry and args.dimension is None:
        raise UsageError("--no-geometry needs --dimension d: without the geometry read-out nothing estimates d.")
    if args.width_multipliers and "net" not in args.learners:
        raise UsageError("--width-multipliers sizes nets; add net to --learners.")
    floor = parse_floor_option(args.floor)
    sizing = parse_sizing(args.sizing)
    s, s_range = smoothness_choice(args)
    table = load(args, target_required=True)
    check_sizes(args.sizes, table.n_samples, owner="--sizes")  # before any work or file
    out = out_dir(args.out)
    geo = None
    if not args.no_geometry:
        geo = describe(table.X, table.y, seed=args.seed, view=not args.no_view, progress=not args.quiet)
        say(str(geo.dimension))
    d = args.dimension if args.dimension is not None else working_dimension(geo.dimension.consensus)
    if s is None:
        s = estimated_smoothness(table.X, table.y, args.seed)
    store = args.store or os.path.join(out, "campaign.sqlite")
    name = args.campaign or "campaign"
    learners = learner_specs(args.learners, args.width_multipliers, args.precision, sizing)
    campaign = Campaign(X=table.X, y=table.y, sizes=args.sizes, repeats=args.repeats, learners=learners,
                        dimension=d, smoothness=s, seed=args.seed, name=name, store=store,
                        dimension_source="given" if args.dimension is not None else "geometry read-out (rounded consensus)")
    extra = {"source": args.data, "target": args.target}
    if geo is not None:
        extra["geometry"] = geo.to_dict()
    executor = "dask" if args.scheduler else ("processes" if args.workers else "inprocess")
    state = campaign.progress()
    say(f"\ncampaign '{name}': {state['total']} cells (sizes {campaign.data.sizes}, {args.repeats} repeats, learners "
        f"{', '.join(l.name for l in campaign.data.learners)}), d = {d:g}"
        f" ({'given' if args.dimension is not None else 'geometry read-out'}), s = {campaign.data.smoothness:g}; store {campaign.store.path}")
    if state["finished"]:
        say(f"resuming: {state['finished']} cells already in the store, {state['remaining']} to run")
    result = campaign.run(executor=executor, n_jobs=args.workers, scheduler=args.scheduler, progress=not args.quiet,
                          metadata=extra)
    say(f"noise-variance estimate (first-neighbour, outside the test set): {result.noise_estimate:.4g}")
    parts = read_out(result, floor=floor, target_error=args.target_error, smoothness_range=s_range,
                     allow_unverified=args.allow_unverified, seed=args.seed)
    settings = report_parts(result, floor, {
        "seed": args.seed, "sizes": campaign.data.sizes, "repeats": args.repeats,
        "learners": [l.name for l in campaign.data.learners], "precision": args.precision,
        "smoothness_range": s_range, "sizing_constants": sizing or None})
    write(out, f"manireg curves: {os.path.basename(args.data)}",
          data={"source": args.data, "target": args.target, "n_samples": table.n_samples, "ambient_dim": table.X.shape[1]},
          geometry=geo, campaign=result, settings=settings, **parts)
    return 0
