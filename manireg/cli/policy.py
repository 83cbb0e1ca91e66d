"""``manireg policy DATA --action COL --reward COL``: run or resume a policy campaign and write its report.

``manireg policy --demo`` runs the built-in synthetic scenario (known reward functions, so the regret is exact).
"""

from __future__ import annotations

import os

from ._common import UsageError, add_run_options, add_store_options, out_dir, say

HELP = "run or resume an off-policy learning campaign (doubly robust, with regret curves) and write its report"


def _clip(text):
    if str(text).lower() == "none":
        return None
    try:
        return float(text)
    except ValueError:
        raise UsageError(f"--clip takes a number in (0, 1/K] or 'none'; got '{text}'.") from None


def add_parser(sub):
    from ..curves.policy import DEFAULT_CLIP, DEFAULT_FOLDS, METHODS

    p = sub.add_parser("policy", help=HELP, description=HELP + ". Running the same command again resumes: finished "
                       "cells are read from the store, only missing ones are fitted.")
    p.add_argument("data", nargs="?", help="the logged data: CSV, Parquet or NPZ file (leave out with --demo)")
    p.add_argument("--demo", action="store_true", help="the built-in synthetic scenario instead of a data file")
    p.add_argument("--quick", action="store_true", help="small demo settings (with --demo)")
    p.add_argument("--action", metavar="COL", help="column of the action taken")
    p.add_argument("--reward", metavar="COL", help="column of the observed reward")
    p.add_argument("--propensity", nargs="+", metavar="COL",
                   help="logged propensity of the action taken (one column), or of every action (one column per action, "
                        "in the sorted order of the action labels)")
    g = p.add_mutually_exclusive_group()
    g.add_argument("--features", nargs="+", metavar="COL", help="use only these feature columns")
    g.add_argument("--drop", nargs="+", metavar="COL", help="leave these columns out of the features (an ID column, a date)")
    p.add_argument("--dimension", type=float, metavar="d", help="intrinsic dimension d for sizing the nets (default: estimated)")
    p.add_argument("--smoothness", type=float, metavar="s", help="Hölder smoothness s of the rewards (default 1)")
    p.add_argument("--sizes", type=int, nargs="+", metavar="N", help="training sizes (default: a geometric grid)")
    p.add_argument("--repeats", type=int, metavar="R", help="repeats per size (default: 5; demo: 3)")
    p.add_argument("--learners", nargs="+", choices=list(METHODS), metavar="LEARNER",
                   help="dr, direct, ipw, oracle (default: all; oracle only with known truth)")
    p.add_argument("--folds", type=int, default=DEFAULT_FOLDS, metavar="K", help="cross-fitting folds (default: %(default)s)")
    p.add_argument("--clip", default=str(DEFAULT_CLIP), metavar="C|none",
                   help="raise propensities below C to C in every weight; 'none' for no clipping (default: %(default)s)")
    add_store_options(p, required=False, default_hint="OUT/campaign.sqlite")
    g = p.add_mutually_exclusive_group()
    g.add_argument("--workers", type=int, metavar="N", help="local worker processes")
    g.add_argument("--scheduler", metavar="ADDRESS", help="address of a dask.distributed scheduler")
    add_run_options(p, "manireg-out/policy")
    p.set_defaults(func=run)
    return p


def _spec_kwargs(args):
    from ..curves.learners import LearnerSpec
    from ..curves.policy import demo_scenario
    from ..data.bandits import load_logged

    if args.demo:
        if args.data or args.action or args.reward or args.propensity:
            raise UsageError("--demo runs the built-in scenario; leave out DATA, --action, --reward and --propensity.")
        kw = demo_scenario(quick=args.quick)
        kw["generator"] = {**kw["generator"], "seed": args.seed}
        if args.learners:
            kw["learners"] = [l for l in kw["learners"] if l.name in args.learners]
        source = {"source": "built-in scenario (synthetic)", **kw["generator"]}
        return kw, source
    if args.quick:
        raise UsageError("--quick goes with --demo.")
    if not args.data:
        raise UsageError("pass the logged data file (DATA), or --demo for the built-in scenario.")
    if not args.action or not args.reward:
        raise UsageError("pass --action COL and --reward COL: the columns of the action taken and of the reward.")
    bandit = load_logged(args.data, action=args.action, reward=args.reward, propensity=args.propensity,
                         features=args.features, drop=args.drop)
    say(f"data: {bandit.n_samples:,} rows x {bandit.ambient_dim} feature columns from {args.data}; "
        f"{bandit.n_actions} actions ({', '.join(bandit.action_names)}); propensities "
        f"{'logged' if bandit.propensity is not None else 'estimated'}")
    kw = {"bandit": bandit, "name": "policy"}
    if args.learners:
        kw["learners"] = [LearnerSpec("policy", params={"method": m}) for m in args.learners]
    source = {"source": args.data, "action": args.action, "reward": args.reward,
              "propensity": " ".join(args.propensity) if args.propensity else "estimated",
              "n_samples": bandit.n_samples, "ambient_dim": bandit.ambient_dim, "actions": ", ".join(bandit.action_names)}
    return kw, source


def run(args) -> int:
    from ..curves.policy import PolicyCampaign, learned_policy
    from ..plots.policy import policy_sections
    from ..report import compose_report, write_report

    if args.repeats is not None and args.repeats < 1:
        raise UsageError(f"--repeats must be >= 1; got {args.repeats}.")
    kw, source = _spec_kwargs(args)
    for key, value in (("sizes", args.sizes), ("repeats", args.repeats), ("dimension", args.dimension),
                       ("smoothness", args.smoothness)):
        if value is not None:
            kw[key] = value
    if args.campaign:
        kw["name"] = args.campaign
    kw.update(folds=args.folds, clip=_clip(args.clip), seed=args.seed)
    out = out_dir(args.out)
    store = args.store or os.path.join(out, "campaign.sqlite")
    campaign = PolicyCampaign(store=store, **kw)  # every check runs before the store is opened
    data = campaign.data
    state = campaign.progress()
    say(f"\npolicy campaign '{data.name}': {state['total']} cells (sizes {data.sizes}, {data.repeats} repeats, learners "
        f"{', '.join(l.name for l in data.learners)}), d = {data.dimension:g} ({data.dimension_source}), "
        f"s = {data.smoothness:g}, {data.folds} folds, clip {data.clip}; store {campaign.store.path}")
    if state["finished"]:
        say(f"resuming: {state['finished']} cells already in the store, {state['remaining']} to run")
    executor = "dask" if args.scheduler else ("processes" if args.workers else "inprocess")
    result = campaign.run(executor=executor, n_jobs=args.workers, scheduler=args.scheduler, progress=not args.quiet,
                          metadata={"source": source})
    failed = int((result.rows["status"] != "ok").sum()) if len(result.rows) else 0
    if failed:
        say(f"warning: {failed} cell(s) failed; their errors are in the store (run again to retry them).")
    from .. import style

    table = result.value_table()
    if table[["regret", "policy_value"]].isna().all().all():
        say("\n(regret and true policy value need the true rewards of synthetic data; a table of logged data gives "
            "the value estimates)")
        table = table.drop(columns=["regret", "policy_value"])
    shown = table.copy()
    for c in shown.columns:
        if shown[c].dtype.kind == "f":
            shown[c] = [style.fmt_number(v, 4) for v in shown[c]]
    shown.columns = [style.plain_label(c) for c in shown.columns]
    say("\n" + shown.to_string(index=False))
    fits = None
    if result.truth:
        fits = result.fit_all(seed=args.seed)
        say("")
        for fit in fits:
            say(str(fit).splitlines()[0])
        for name, why in result.unfitted().items():
            say(f"{name}: no regret exponent ({why})")
        say("(no reference rate is shown: see docs/policy.md)")
    names = [l.name for l in data.learners]
    pick = "dr" if "dr" in names else names[0]
    pmap = learned_policy(campaign, pick, n=max(data.sizes), repeat=0)  # refits that one cell
    title = f"manireg policy: {source.get('source')}"
    sections, summary = compose_report(title=title, data=source, settings={
        "seed": args.seed, "sizes": data.sizes, "repeats": data.repeats, "learners": names, "folds": data.folds,
        "clip": data.clip, "dimension": data.dimension, "smoothness": data.smoothness, "store": campaign.store.path,
        "campaign": data.name})
    sections += policy_sections(result, fits, pmap)
    summary["policy"] = {"values": table.to_dict(orient="records"), "overlap": result.overlap(),
                         "fits": None if fits is None else fits.to_frame().to_dict(orient="records"),
                         "unfitted": result.unfitted() if result.truth else {},
                         "optimal_value": result.optimal_value,
                         "map": None if pmap is None else pmap.to_dict()}
    paths = write_report(out, title, sections, summary)
    say(f"\nreport: {paths['html']}\nsummary: {paths['summary']}")
    return 0
