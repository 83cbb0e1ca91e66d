"""``manireg geometry DATA``: intrinsic dimension, charts, reach and curvature of a table, with figures."""

from __future__ import annotations

import os

from ._common import add_data_options, add_run_options, load, out_dir, say, steps_bar, warn, write_json

HELP = "intrinsic dimension, charts, reach and curvature of a data file"


def add_parser(sub):
    p = sub.add_parser("geometry", help=HELP, description=HELP + ".")
    add_data_options(p, target_required=False)
    p.add_argument("--dimension", type=int, metavar="d", help="intrinsic dimension for charts and reach (default: the rounded consensus)")
    p.add_argument("--radius", type=float, metavar="r", help="chart radius (default: the rule's radius, from the reach estimate)")
    p.add_argument("--no-view", action="store_true", help="skip the 2-D view of the data")
    p.add_argument("--view", choices=("spectral", "umap"), default="spectral",
                   help="the 2-D view: a Laplacian eigenmap (default, about a second) or UMAP (better at separating "
                        "clusters; slower than the rest of the read-out)")
    p.add_argument("--on-disk", action="store_true",
                   help="read the file in chunks instead of loading it (.npy, .parquet, .zarr): dimension from the "
                        "exact neighbours of --queries rows, charts and reach on --landmarks rows")
    p.add_argument("--queries", type=int, default=2000, metavar="N", help="query rows of the neighbour pass with --on-disk (default: %(default)s)")
    p.add_argument("--landmarks", type=int, default=4000, metavar="N", help="rows the charts and reach are fitted on with --on-disk (default: %(default)s)")
    add_run_options(p, "manireg-out/geometry")
    p.set_defaults(func=run)
    return p


def describe(X, y, *, seed, view, dimension=None, radius=None, progress=True, n_boot=200):
    """The geometry read-out with a progress bar naming each step; warnings become one line each."""
    from ..geometry import GEOMETRY_STEPS, describe_geometry

    import warnings

    steps = GEOMETRY_STEPS if view else GEOMETRY_STEPS[:-1]
    cb, close = steps_bar(steps, progress, "geometry")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            geo = describe_geometry(X, y, dimension=dimension, radius=radius, embed=view, seed=seed, callback=cb,
                                    n_boot=n_boot)
        finally:
            close()
    # the dimension report prints its own warnings; the others become one line each
    shown = set(getattr(geo.dimension, "warnings", []) or [])
    for w in caught:
        text = " ".join(str(w.message).split())
        if issubclass(w.category, (DeprecationWarning, PendingDeprecationWarning, ImportWarning, FutureWarning)):
            continue
        if "matplotlib" in str(w.filename) or any(s in text for s in shown):
            continue
        warn(text)
    return geo


def run_on_disk(args) -> int:
    """``--on-disk``: the read-out of :func:`manireg.geometry.ondisk.describe_geometry_on_disk`."""
    from ..data import open_table
    from ..geometry.ondisk import describe_geometry_on_disk

    table = open_table(args.data, args.target, features=args.features, drop=args.drop)
    say(f"data: {table.n_samples:,} rows x {table.n_features} feature columns in {args.data} (read in chunks)")
    out = out_dir(args.out)
    cb, close = steps_bar(("dimension", "charts"), not args.quiet, "geometry")
    try:
        geo = describe_geometry_on_disk(table, n_queries=args.queries, n_landmarks=args.landmarks,
                                        dimension=args.dimension, radius=args.radius, seed=args.seed, callback=cb)
    finally:
        close()
    say(str(geo))
    write_json(os.path.join(out, "geometry.json"), geo.to_dict())
    say(f"\nwritten: {os.path.join(out, 'geometry.json')}")
    return 0


def run(args) -> int:
    from ..plots import plot_chart_counts, plot_dimension_profile, plot_spectra

    if args.on_disk:
        return run_on_disk(args)
    table = load(args, target_required=False)
    out = out_dir(args.out)
    geo = describe(table.X, table.y, seed=args.seed, view=False if args.no_view else args.view, dimension=args.dimension,
                   radius=args.radius, progress=not args.quiet)
    say(str(geo))
    write_json(os.path.join(out, "geometry.json"), geo.to_dict())
    figs = {"dimension_profile.png": plot_dimension_profile(geo.dimension), "chart_spectra.png": plot_spectra(geo.atlas),
            "chart_counts.png": plot_chart_counts(geo.chart_counts)}
    if geo.embedding is not None:
        from ..plots import plot_embedding

        rows = geo.embedding.rows
        vals = geo.target[rows] if geo.target is not None else geo.assignments[rows]
        figs["view.png"] = plot_embedding(geo.embedding, vals, kind="target" if geo.target is not None else "chart")
    import matplotlib.pyplot as plt

    for name, fig in figs.items():
        fig.savefig(os.path.join(out, name), dpi=110, bbox_inches="tight")
        plt.close(fig)
    say(f"\nwritten: {os.path.join(out, 'geometry.json')} and {len(figs)} figures in {out}")
    return 0
