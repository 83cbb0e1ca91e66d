"""``manireg plan --store FILE --target-error E``: samples for a target error from a measured curve."""

from __future__ import annotations

from ._common import UsageError, add_floor_option, add_store_options, captured_warnings, parse_floor_option, say

HELP = "samples needed for a target error, from a campaign's measured curve"


def add_parser(sub):
    p = sub.add_parser("plan", help=HELP, description=HELP + " (with an interval), and the network at that n. "
                       "For the rules' network at a given n without a measured curve, use `manireg size`.")
    add_store_options(p, required=True)
    p.add_argument("--target-error", type=float, required=True, metavar="E", help="the test error to reach")
    p.add_argument("--learner", metavar="NAME", help="whose curve (may be left out when the campaign has one learner)")
    p.add_argument("--dimension", type=float, metavar="d", help="intrinsic dimension d (default: the campaign's)")
    p.add_argument("--smoothness", type=float, metavar="s", help="Hölder smoothness s (default: the campaign's)")
    add_floor_option(p)
    p.add_argument("--allow-unverified", action="store_true", help="plan even from a curve without a measured exponent")
    p.add_argument("--seed", type=int, default=0, help="seed of the bootstrap (default: %(default)s)")
    p.set_defaults(func=run)
    return p


def run(args) -> int:
    from .report import open_campaign

    if args.target_error <= 0:
        raise UsageError(f"--target-error must be > 0; got {args.target_error:g}.")
    floor = parse_floor_option(args.floor)
    result = open_campaign(args)
    if (result.spec or {}).get("task") == "classify":
        raise UsageError(f"campaign '{result.name}' is a classification campaign; `manireg plan` inverts a regression "
                         "curve of the test error. Read the classification exponents in its report (`manireg report --store`).")
    learners = result.learners
    learner = args.learner or (learners[0] if len(learners) == 1 else None)
    if learner is None:
        raise UsageError(f"campaign '{result.name}' holds learners {', '.join(learners)}; pass --learner NAME.")
    if learner not in learners:
        raise UsageError(f"campaign '{result.name}' has no learner '{learner}'; it holds {', '.join(learners)}.")
    over = {k: v for k, v in (("dimension", args.dimension), ("smoothness", args.smoothness)) if v is not None}
    try:
        kw = result.fit_settings(floor=floor, seed=args.seed, **over)
    except ValueError as exc:
        raise UsageError(str(exc)) from None
    with captured_warnings():
        fit = result.fit(learner, **kw)
        say(str(fit))
        plan = result.plan(args.target_error, learner, fit=fit, allow_unverified=args.allow_unverified)
    say("\nplan: " + str(plan))
    if plan.architecture:
        a = plan.architecture
        say(f"network at n = {plan.architecture_n:,}: depth {a['depth']}, width {a['width']}, nonzero budget "
            f"{a['nonzero_budget']:,}, {a['n_parameters']:,} parameters")
    return 0
