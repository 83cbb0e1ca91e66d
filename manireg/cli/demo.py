"""``manireg demo``: the whole job on the built-in scenario (renderings of a shaded pebble), with a report."""

from __future__ import annotations

import os

from ._common import add_run_options, out_dir, say
from ._readout import read_out, report_parts, summary_lines
from .report import write

HELP = "the whole job on the built-in pebble-image scenario, with a report"


def add_parser(sub):
    p = sub.add_parser("demo", help=HELP, description=HELP + ".")
    p.add_argument("--quick", action="store_true", help="small settings (well under a minute)")
    add_run_options(p, "manireg-out/demo")
    p.set_defaults(func=run)
    return p


def run(args) -> int:
    from ..curves import Campaign, LearnerSpec
    from ..data import pebble_scenario
    from ..geometry import dimension_range, working_dimension
    from .geometry import describe

    out = out_dir(args.out)
    from ..curves.evidence import EvidenceSettings

    # nets take the default training budget (steps from epochs with a floor and a ceiling, docs/theory.md); the
    # budget check retrains with 2x and 4x the steps one flagged cell per size and one cell at each end of the
    # curve, the capacity check one cell of the largest size with 2x width
    checks = EvidenceSettings(budget_repeats=1, capacity_sizes=1)
    if args.quick:
        n, sizes, repeats, view, n_boot = 1400, [80, 160, 320, 640, 1000], 3, False, 100
    else:
        n, sizes, repeats, view, n_boot = 6500, [125, 250, 500, 1000, 2000, 4000], 5, True, 200
    net = {}
    reg = pebble_scenario(n, seed=args.seed)
    m = reg.manifold
    say(f"demo scenario: {n:,} renderings of the pebble, {m.image_shape[0]}x{m.image_shape[1]} pixels (D = {m.ambient_dim}); "
        f"truth: d = {m.dimension}, target smoothness s = {reg.smoothness}, noise variance {reg.noise_variance:g}")
    geo = describe(reg.X, reg.y, seed=args.seed, view=view, progress=not args.quiet, n_boot=n_boot)
    say()
    say(str(geo))
    d_hat = working_dimension(geo.dimension.consensus)
    store = os.path.join(out, "campaign.sqlite")
    campaign = Campaign.from_regression_sample(reg, sizes=sizes, repeats=repeats, dimension=d_hat, seed=args.seed,
                                               dimension_source="geometry read-out (rounded consensus)",
                                               dimension_interval=dimension_range(geo.dimension),
                                               name="demo", learners=[LearnerSpec("net", params=net), LearnerSpec("knn")],
                                               store=store)
    state = campaign.progress()
    say(f"\ncampaign 'demo': {state['total']} cells (sizes {sizes}, {repeats} repeats, learners net and knn), "
        f"sized with the estimated d = {d_hat:g} and s = {reg.smoothness}; store {campaign.store.path}")
    if state["finished"]:
        say(f"resuming: {state['finished']} cells already in the store, {state['remaining']} to run")
    # the full demo trains in two worker processes: the nets train on one thread each, so in-process training would
    # leave a core idle (the rows do not depend on the executor); the quick one stays in process, where starting
    # two workers (16 s more CPU time in the quick demo, measured) costs more than it saves
    workers = 1 if args.quick else min(2, os.cpu_count() or 1)
    result = campaign.run(progress=not args.quiet, metadata={"geometry": geo.to_dict(), "source": "built-in pebble scenario"},
                          evidence=checks, executor="processes" if workers > 1 else "inprocess", n_jobs=workers)
    ev = (result.summary or {}).get("evidence") or {}
    say(f"budget check: {ev.get('total', 0)} evidence cells (flagged net cells and one cell at each end of the curve with "
        "2x and 4x the steps, the largest size with 2x width), stored under their own labels")
    # the demo knows its noise variance and gives it as the floor; it shows a plan even from an unverified
    # curve, with the plan's warning in plain words (`manireg curves` refuses unless --allow-unverified)
    floor = float(reg.noise_variance)
    parts = read_out(result, floor=floor, allow_unverified=True, seed=args.seed)
    say("\nin short (exponent [95% interval], the fit's verdict; against the learner's own reference rate; diagnosis):")
    for line in summary_lines(parts):
        say("  " + line)
    settings = report_parts(result, floor, {"seed": args.seed, "quick": args.quick, "sizes": sizes, "repeats": repeats})
    write(out, "manireg demo: pebble renderings",
          data={"source": "built-in pebble scenario (manireg.data.pebble_scenario)", "n_samples": n,
                "ambient_dim": m.ambient_dim, "true_dimension": m.dimension, "smoothness": reg.smoothness,
                "noise_variance": reg.noise_variance},
          geometry=geo, campaign=result, settings=settings, true_dimension=m.dimension, **parts)
    return 0
