"""``manireg report --store FILE``: rebuild a campaign's report from its store, without training."""

from __future__ import annotations

import os

from ._common import (UsageError, add_floor_option, add_run_options, add_store_options, out_dir, parse_floor_option,
                      say)
from ._readout import read_out, report_parts

HELP = "rebuild a campaign's report from its store, without training"


def add_parser(sub):
    p = sub.add_parser("report", help=HELP, description=HELP + ".")
    add_store_options(p, required=True)
    p.add_argument("--target-error", type=float, metavar="E", help="plan the samples for this test error")
    p.add_argument("--smoothness-range", type=float, nargs=2, metavar=("A", "B"), help="a range of s: predictions become intervals")
    add_floor_option(p)
    p.add_argument("--allow-unverified", action="store_true", help="plan even from a curve without a measured exponent")
    add_run_options(p, "manireg-out/report")
    p.set_defaults(func=run)
    return p


def open_campaign(args):
    """The campaign named by --store and --campaign, with rows (a clear error otherwise)."""
    from ..curves import Campaign

    if not os.path.exists(args.store):
        raise UsageError(f"no store at '{args.store}'. Pass the --store file a campaign was run with "
                         "(`manireg curves` writes OUT/campaign.sqlite by default).")
    result = Campaign.from_store(args.store, args.campaign)
    if not len(result.rows):
        raise UsageError(f"campaign '{result.name}' in '{args.store}' has no rows yet; run it first with `manireg curves`.")
    return result


def write(out, title, **parts):
    """Compose and write the report; print where it is."""
    from ..report import compose_report, write_report

    sections, summary = compose_report(title=title, **parts)
    paths = write_report(out, title, sections, summary)
    say(f"\nreport: {paths['html']}\nsummary: {paths['summary']}")
    return paths


def run(args) -> int:
    from ..curves.store import ResultStore

    floor = parse_floor_option(args.floor)
    s_range = tuple(args.smoothness_range) if args.smoothness_range else None
    result = open_campaign(args)
    out = out_dir(args.out)
    meta = ResultStore(args.store).campaign_meta(result.name)
    if (result.spec or {}).get("task") == "classify":
        from ..curves.readout import CLASSIFY_METRICS, classification_reference
        from .curves import classification_read_out

        metric_fits = classification_read_out(result, args.seed)
        settings = {"seed": args.seed, "spec": result.spec, "task": "classify", "campaign": result.name,
                    "store": result.store_path, "dimension": result.dimension, "smoothness": result.smoothness,
                    "floor": {m: ("fitted (the Bayes risk is unknown)" if f == "fit" else "none (goes to zero)")
                              for m, f in CLASSIFY_METRICS.items() if m in metric_fits}}
        write(out, f"manireg campaign '{result.name}' (classification, rebuilt from its store)",
              data={"source": meta.get("source", "(recorded in the store)"), "target": meta.get("target"),
                    "n_samples": meta.get("n_total"), "ambient_dim": result.ambient_dim},
              geometry=meta.get("geometry"), campaign=result, settings=settings, classification=metric_fits,
              classification_reference=classification_reference(result.smoothness, result.dimension))
        return 0
    parts = read_out(result, floor=floor, target_error=args.target_error, smoothness_range=s_range,
                     allow_unverified=args.allow_unverified, seed=args.seed)
    settings = report_parts(result, floor, {"seed": args.seed, "spec": result.spec, "smoothness_range": s_range})
    write(out, f"manireg campaign '{result.name}' (rebuilt from its store)",
          data={"source": meta.get("source", "(recorded in the store)"), "target": meta.get("target"),
                "n_samples": meta.get("n_total"), "ambient_dim": result.ambient_dim, "fingerprint": meta.get("fingerprint")},
          geometry=meta.get("geometry"), campaign=result, settings=settings, **parts)
    return 0
