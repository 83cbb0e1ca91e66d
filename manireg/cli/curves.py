"""``manireg curves DATA --target COL``: run or resume a learning-curve campaign and write its report."""

from __future__ import annotations

import os

from ._common import (UsageError, add_data_options, add_floor_option, add_run_options, add_store_options, load,
                      out_dir, parse_floor_option, parse_sizing, say)
from ._readout import read_out, report_parts
from ..curves.readout import CLASSIFY_METRICS, classification_reference
from .report import write

HELP = "run or resume a learning-curve campaign on a data file and write its report"
REGRESS = ("net", "knn", "kernel_ridge", "conv_net")
CLASSIFY = ("net_classifier", "knn_classifier", "logistic", "conv_classifier")
CONV = ("conv_net", "conv_classifier")


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
    p.add_argument("--test-size", type=float, metavar="T",
                   help="the fixed test set: a number of rows (e.g. 2000) or a share of the rows below 1 (default: 0.2)")
    p.add_argument("--task", default="regress", choices=["regress", "classify"],
                   help="regress a numeric target, or classify labels (integers or strings) (default: %(default)s)")
    p.add_argument("--learners", nargs="+", default=None, choices=list(REGRESS + CLASSIFY),
                   metavar="LEARNER", help="regress: net, knn, kernel_ridge, conv_net (default: net knn); classify: "
                                           "net_classifier, knn_classifier, logistic, conv_classifier (default: the "
                                           "first three). conv_net and conv_classifier read each row as an image")
    p.add_argument("--image-shape", type=int, nargs="+", metavar="N",
                   help="H W or C H W of the image each row holds, for conv_net / conv_classifier (default: square "
                        "grey images when the feature count is a square)")
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
    p.add_argument("--evidence", action="store_true",
                   help="after the curve, run the evidence cells of the nets (the budget check: 2x and 4x the steps; the "
                        "capacity check: 2x width at the largest sizes), stored under their own labels; they gate the verdict")
    p.add_argument("--no-geometry", action="store_true", help="skip the geometry read-out (needs --dimension)")
    p.add_argument("--no-view", action="store_true", help="skip the 2-D view in the geometry read-out")
    p.add_argument("--on-disk", action="store_true",
                   help="leave the file on disk (.npy, .parquet, .zarr): workers read their rows by index; the geometry "
                        "read-out uses query and landmark subsamples")
    add_run_options(p, "manireg-out/curves")
    p.set_defaults(func=run)
    return p


def test_split(value) -> dict:
    """``--test-size``: a count of rows (>= 1) or a share of the rows (below 1), as the campaign's keyword."""
    if value is None:
        return {}
    if not value > 0 or value != value:
        raise UsageError(f"--test-size must be a number of rows (e.g. 2000) or a share of the rows below 1 (e.g. 0.2); "
                         f"got {value}.")
    if value < 1:
        return {"test_fraction": float(value)}
    if value != int(value):
        raise UsageError(f"--test-size {value}: a number of rows must be whole (e.g. {int(value)}), or a share below 1.")
    return {"test_size": int(value)}


def learner_specs(names, width_multipliers=None, precision="auto", sizing=None, image_shape=None):
    """LearnerSpecs for the command line's learners; the net at the rule's width comes first, then each
    extra width multiplier."""
    from ..curves import LearnerSpec

    extra = {} if precision == "auto" else {"precision": precision}
    if sizing:
        extra["constants"] = dict(sizing)
    specs = []
    for name in names:
        if name in ("net", "net_classifier"):
            mults = [1.0] + [float(m) for m in (width_multipliers or []) if float(m) != 1.0]
            for m in dict.fromkeys(mults):
                specs.append(LearnerSpec(name, params={"width_multiplier": m, **extra}))
        elif name in CONV:
            specs.append(LearnerSpec(name, params={} if image_shape is None else {"image_shape": tuple(image_shape)}))
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
    from ..geometry import dimension_range, working_dimension
    from .geometry import describe

    if args.repeats < 1:
        raise UsageError(f"--repeats must be >= 1; got {args.repeats}.")
    if args.no_geometry and args.dimension is None:
        raise UsageError("--no-geometry needs --dimension d: without the geometry read-out nothing estimates d.")
    classify = args.task == "classify"
    allowed = CLASSIFY if classify else REGRESS
    if args.learners is None:
        args.learners = list(CLASSIFY) if classify else ["net", "knn"]
    wrong = [l for l in args.learners if l not in allowed]
    if wrong:
        raise UsageError(f"--learners {' '.join(wrong)} do not do --task {args.task}; use {', '.join(allowed)}.")
    if args.image_shape is not None:
        if len(args.image_shape) not in (2, 3) or min(args.image_shape) < 1:
            raise UsageError(f"--image-shape takes H W or C H W (positive integers); got {' '.join(map(str, args.image_shape))}.")
        if not set(CONV) & set(args.learners):
            raise UsageError("--image-shape is for the convolutional learners; add conv_net (or conv_classifier) to --learners.")
    if args.width_multipliers and not {"net", "net_classifier"} & set(args.learners):
        raise UsageError("--width-multipliers sizes nets; add net (or net_classifier) to --learners.")
    floor = parse_floor_option(args.floor)
    sizing = parse_sizing(args.sizing)
    s, s_range = smoothness_choice(args)
    disk_geo = None
    if args.on_disk:
        if classify:
            raise UsageError("--on-disk reads regression targets; a classification campaign loads its table into memory "
                             "(leave out --on-disk).")
        from ..data import open_table

        table = open_table(args.data, args.target, features=args.features, drop=args.drop)
        say(f"data: {table.n_samples:,} rows x {table.n_features} feature columns in {args.data} (left on disk); "
            f"target '{table.target_name}'")
        X, y, D = table, None, table.n_features
    else:
        table = load_labelled(args) if classify else load(args, target_required=True)
        X, y, D = table.X, table.y, table.X.shape[1]
    split = test_split(args.test_size)
    test_size, sizes = check_sizes(args.sizes, table.n_samples, owner="--sizes", **split)  # before any work or file
    if classify:
        check_classes(table, sizes[0])
    out = out_dir(args.out)
    store = args.store or os.path.join(out, "campaign.sqlite")
    geo = None
    keep_geometry = lambda: None  # noqa: E731 - stores a computed geometry read-out once the campaign is built
    if args.on_disk and not args.no_geometry:
        from ..geometry.ondisk import describe_geometry_on_disk

        disk_geo, keep_geometry = stored_geometry(store, table.fingerprint(), {"read-out": "on disk", "seed": args.seed},
                                                  lambda: describe_geometry_on_disk(table, seed=args.seed))
        say(str(disk_geo))
        consensus = disk_geo.consensus
    elif not args.no_geometry:
        from ..geometry.neighbors import data_fingerprint

        geo, keep_geometry = stored_geometry(store, data_fingerprint(table.X),
                                             {"read-out": "in memory", "seed": args.seed, "view": not args.no_view,
                                              "n_boot": 200},
                                             lambda: describe(table.X, table.y, seed=args.seed, view=not args.no_view,
                                                              progress=not args.quiet, n_boot=200))
        geo.target = table.y  # colours the 2-D view; the store's key is the features' fingerprint only
        say(str(geo.dimension))
        consensus = geo.dimension.consensus
    d = args.dimension if args.dimension is not None else working_dimension(consensus)
    if s is None:
        if classify or y is None:
            say("smoothness not given; using s = 1 (Lipschitz) for the sizing and the predictions "
                f"({'labels' if classify else 'a table left on disk'}: no estimate from local differences); "
                "pass --smoothness to set it")
            s = 1.0
        else:
            s = estimated_smoothness(X, y, args.seed)
    name = args.campaign or "campaign"
    learners = learner_specs(args.learners, args.width_multipliers, args.precision, sizing, args.image_shape)
    campaign = Campaign(X=X, y=y, sizes=args.sizes, repeats=args.repeats, learners=learners, **split,
                        dimension=d, smoothness=s, seed=args.seed, name=name, store=store, task=args.task,
                        dimension_source="given" if args.dimension is not None else "geometry read-out (rounded consensus)",
                        dimension_interval=None if geo is None or args.dimension is not None else dimension_range(geo.dimension))
    keep_geometry()  # after the campaign's settings are checked: a refused setting leaves no store behind
    extra = {"source": args.data, "target": args.target}
    if geo is not None:
        extra["geometry"] = geo.to_dict()
    if disk_geo is not None:
        extra["geometry_on_disk"] = disk_geo.to_dict()
    executor = "dask" if args.scheduler else ("processes" if args.workers else "inprocess")
    state = campaign.progress()
    say(f"\ncampaign '{name}': {state['total']} cells (sizes {campaign.data.sizes}, {args.repeats} repeats, learners "
        f"{', '.join(l.name for l in campaign.data.learners)}), d = {d:g}"
        f" ({'given' if args.dimension is not None else 'geometry read-out'}), s = {campaign.data.smoothness:g}; store {campaign.store.path}")
    if state["finished"]:
        say(f"resuming: {state['finished']} cells already in the store, {state['remaining']} to run")
    result = campaign.run(executor=executor, n_jobs=args.workers, scheduler=args.scheduler, progress=not args.quiet,
                          metadata=extra, evidence=bool(args.evidence) and not classify)
    if args.evidence and not classify:
        ev = (result.summary or {}).get("evidence") or {}
        say(f"evidence cells (budget and capacity checks of the nets): {ev.get('total', 0)} "
            f"({ev.get('skipped', 0)} already in the store)")
    if classify:
        metric_fits = classification_read_out(result, args.seed)
        settings = report_parts(result, "fit", {
            "seed": args.seed, "sizes": campaign.data.sizes, "repeats": args.repeats, "task": "classify",
            "learners": [l.name for l in campaign.data.learners], "precision": args.precision,
            "sizing_constants": sizing or None})
        settings["floor"] = {m: ("fitted (the Bayes risk is unknown)" if f == "fit" else "none (goes to zero)")
                             for m, f in CLASSIFY_METRICS.items() if m in metric_fits}
        settings.pop("noise_estimate", None)
        settings.pop("noise_estimate_interval", None)
        write(out, f"manireg curves: {os.path.basename(args.data)} (classification)",
              data={"source": args.data, "target": args.target, "n_samples": table.n_samples, "ambient_dim": D,
                    "classes": ", ".join(f"{c!r} ({k})" for c, k in zip(table.classes, table.counts))},
              geometry=geo, campaign=result, settings=settings, classification=metric_fits,
              classification_reference=classification_reference(result.smoothness, result.dimension))
        return 0
    iv = result.noise_estimate_interval
    say(f"noise-variance estimate (local differences, outside the test set): {result.noise_estimate:.4g}"
        + ("" if iv is None else f" [interval {iv[0]:.4g}, {iv[1]:.4g}]"))
    parts = read_out(result, floor=floor, target_error=args.target_error, smoothness_range=s_range,
                     allow_unverified=args.allow_unverified, seed=args.seed)
    settings = report_parts(result, floor, {
        "seed": args.seed, "sizes": campaign.data.sizes, "repeats": args.repeats,
        "learners": [l.name for l in campaign.data.learners], "precision": args.precision,
        "smoothness_range": s_range, "sizing_constants": sizing or None, "evidence": bool(args.evidence)})
    write(out, f"manireg curves: {os.path.basename(args.data)}",
          data={"source": args.data, "target": args.target, "n_samples": table.n_samples, "ambient_dim": D},
          geometry=geo, campaign=result, settings=settings, **parts)
    return 0


class _Tee:
    """Writes through to ``out`` and keeps the complete lines written."""

    def __init__(self, out):
        self.out, self.lines, self._part = out, [], ""

    def write(self, text):
        self.out.write(text)
        self._part += text
        *done, self._part = self._part.split("\n")
        self.lines.extend(done)
        return len(text)

    def flush(self):
        self.out.flush()


def stored_geometry(store_path, fingerprint, settings, compute):
    """The geometry read-out of the campaign's store when the same data (``fingerprint``) was read with the
    same ``settings`` before (the warning lines it printed then are shown again); otherwise ``compute()``.
    Returns ``(result, keep)``: ``keep()`` stores a computed read-out (a no-op for one read back); call it once
    the campaign's settings are checked. Says in one line when the read-out comes from the store."""
    import contextlib
    import sys

    from ..curves.store import ResultStore, geometry_key
    from ..style import WARNING_PREFIX

    key = geometry_key(fingerprint, settings)
    if os.path.isfile(store_path):
        try:
            hit = ResultStore(store_path).geometry(key)
        except ValueError as exc:  # StoreError: unreadable, unwritable or from a newer manireg
            raise UsageError(str(exc)) from None
        if hit is not None:
            result, notes, created = hit
            say(f"geometry read-out: read from the store {store_path} (same data and settings, computed {created}); "
                "a change of data or settings computes it again")
            for line in notes:
                say(line)
            return result, lambda: None
    tee = _Tee(sys.stdout)
    with contextlib.redirect_stdout(tee):
        result = compute()
    notes = [line for line in tee.lines if line.startswith(WARNING_PREFIX)]

    def keep():
        ResultStore(store_path).put_geometry(key, result, fingerprint=fingerprint, settings=settings, notes=notes)

    return result, keep


def load_labelled(args):
    """The features (every column but --target, --drop and unlisted ones) and the --target column read as
    class labels (integers or strings); prints the classes found. Bad labels: exit 2 (UsageError)."""
    from types import SimpleNamespace

    from ..data import load_table
    from ..data.labels import encode_labels, read_label_column

    if args.target is None:
        raise UsageError("pass --target COL: the column of class labels.")
    try:
        raw = read_label_column(args.data, args.target)
        codes, classes = encode_labels(raw, name=f"target column '{args.target}'", owner="--task classify")
    except ValueError as exc:
        raise UsageError(str(exc)) from None
    drop = None if args.features else list(getattr(args, "drop", None) or []) + [args.target]
    table = load_table(args.data, target=None, features=args.features, drop=drop)
    if len(codes) != table.n_samples:
        raise UsageError(f"--target '{args.target}' has {len(codes)} values but the table has {table.n_samples} rows.")
    counts = [int((codes == i).sum()) for i in range(len(classes))]
    shown = ", ".join(f"{c!r} ({k})" for c, k in list(zip(classes, counts))[:20])
    say(f"data: {table.n_samples:,} rows x {table.X.shape[1]} feature columns from {args.data}; "
        f"{len(classes)} classes in '{args.target}': {shown}{' ...' if len(classes) > 20 else ''}")
    return SimpleNamespace(X=table.X, y=codes, n_samples=table.n_samples, classes=classes, counts=counts)


def check_classes(table, smallest):
    """At least two classes, and no class with fewer rows than the smallest size (exit 2 otherwise)."""
    if len(table.classes) < 2:
        raise UsageError(f"--task classify needs at least 2 classes; the target holds one ({table.classes[0]!r}).")
    rare = [(c, k) for c, k in zip(table.classes, table.counts) if k < smallest]
    if rare:
        raise UsageError(
            f"class {rare[0][0]!r} has {rare[0][1]} rows, fewer than the smallest size {smallest}; every class needs "
            "at least as many rows as the smallest size (merge or drop rare classes, or lower --sizes)."
        )


def classification_read_out(result, seed) -> dict:
    """The core classification read-out (:func:`manireg.curves.readout.classification_read_out`), printed;
    returns ``{metric: [ExponentFit, ...]}`` for the report."""
    from ..curves.readout import classification_read_out as core
    from ._common import captured_warnings

    say()
    with captured_warnings():
        ro = core(result.rows, smoothness=result.smoothness, dimension=result.dimension, learners=result.learners,
                  seed=seed)
    for metric, fits in ro.fits.items():
        for learner, why in ro.failures[metric].items():
            say(f"{learner} {metric}: no fit ({why})")
        for fit in fits:
            say(f"[{metric}] {fit}")
    return ro.fits
