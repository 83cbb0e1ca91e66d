"""``manireg track``: rate-tracking campaigns over targets of several s and manifolds of several d."""

from __future__ import annotations

import json
import os

from ._common import UsageError, add_run_options, out_dir, say

HELP = "run the same learners on targets of several s and manifolds of several d, and set measured exponents against predicted ones"


def add_parser(sub):
    from ..curves.tracking import DEFAULT_TRACKING

    p = sub.add_parser("track", help=HELP, description=HELP + ". One campaign per (d, s) in one store; running the "
                       "same command again resumes.")
    p.add_argument("--manifold", default="sphere", choices=["sphere", "graph_manifold"],
                   help="generator of the points (default: %(default)s)")
    p.add_argument("--dimensions", type=int, nargs="+", default=list(DEFAULT_TRACKING["dimensions"]), metavar="d",
                   help="intrinsic dimensions d (default: %(default)s)")
    p.add_argument("--smoothness", type=float, nargs="+", default=list(DEFAULT_TRACKING["smoothness"]), metavar="s",
                   help="Hölder smoothness values s of the targets (default: %(default)s)")
    p.add_argument("--learners", nargs="+", default=["knn", "net"], choices=["net", "knn", "kernel_ridge"],
                   metavar="LEARNER", help="net, knn, kernel_ridge (default: knn net)")
    p.add_argument("--ambient-dim", type=int, default=DEFAULT_TRACKING["ambient_dim"], metavar="D",
                   help="ambient dimension D of every manifold (default: %(default)s)")
    p.add_argument("--sizes", type=int, nargs="+", default=list(DEFAULT_TRACKING["sizes"]), metavar="N",
                   help="training sizes (default: %(default)s)")
    p.add_argument("--repeats", type=int, default=DEFAULT_TRACKING["repeats"], metavar="R",
                   help="repeats per size (default: %(default)s)")
    p.add_argument("--store", metavar="FILE", help="the campaign store (SQLite) (default: OUT/tracking.sqlite)")
    p.add_argument("--workers", type=int, metavar="N", help="local worker processes")
    add_run_options(p, "manireg-out/track")
    p.set_defaults(func=run)
    return p


def run(args) -> int:
    from ..curves.tracking import track_rates

    if args.repeats < 2:
        raise UsageError(f"--repeats must be >= 2 for exponent intervals; got {args.repeats}.")
    if len(args.dimensions) * len(args.smoothness) < 3:
        raise UsageError("rate tracking needs at least 3 (d, s) pairs for a slope; give more --dimensions or --smoothness.")
    out = out_dir(args.out)
    store = args.store or os.path.join(out, "tracking.sqlite")
    say(f"rate tracking: {len(args.dimensions) * len(args.smoothness)} campaigns in {store}")
    result = track_rates(manifold=args.manifold, dimensions=args.dimensions, smoothness=args.smoothness,
                         learners=args.learners, ambient_dim=args.ambient_dim, sizes=args.sizes, repeats=args.repeats,
                         store=store, seed=args.seed, executor="processes" if args.workers else "inprocess",
                         n_jobs=args.workers, progress=not args.quiet)
    say(str(result))
    with open(os.path.join(out, "tracking.json"), "w", encoding="utf-8") as fh:
        json.dump(result.to_dict(), fh, indent=1)
    from ..plots.tracking import plot_rate_tracking

    plot_rate_tracking(result).savefig(os.path.join(out, "tracking.png"), dpi=110)
    say(f"wrote {os.path.join(out, 'tracking.json')} and tracking.png")
    return 0
