"""``manireg size``: the network the rules give for n samples of an s-smooth target on a d-dimensional set."""

from __future__ import annotations

import math

from ._common import UsageError, parse_sizing, say

HELP = "the network the sizing rules give (depth, width, nonzero budget) and the predicted exponent"


def add_parser(sub):
    p = sub.add_parser("size", help=HELP, description=HELP + ".")
    p.add_argument("--dimension", type=float, metavar="d", required=True, help="intrinsic dimension d")
    p.add_argument("--smoothness", type=float, metavar="s", required=True, help="Hölder smoothness s of the target")
    p.add_argument("--ambient-dim", type=int, metavar="D", help="ambient dimension D (input width; also gives the ambient exponent)")
    p.add_argument("--sizes", type=float, nargs="+", metavar="N", help="sample sizes of the table (default 1e2 1e3 1e4 1e5)")
    p.add_argument("--sizing", nargs="+", metavar="NAME=VALUE", help="sizing constants, e.g. c_width=4 width_max=1024")
    p.set_defaults(func=run)
    return p


def run(args) -> int:
    from ..style import fmt_number
    from ..theory import SizingConstants, ambient_exponent, regression_exponent, sizing_table

    if args.dimension <= 0 or args.smoothness <= 0:
        raise UsageError(f"--dimension and --smoothness must be > 0; got {args.dimension:g} and {args.smoothness:g}.")
    D = args.ambient_dim if args.ambient_dim is not None else max(1, int(math.ceil(args.dimension)))
    if D < args.dimension:
        raise UsageError(f"--ambient-dim ({D}) must be >= --dimension ({args.dimension:g}).")
    constants = SizingConstants(**parse_sizing(args.sizing))
    b = regression_exponent(args.dimension, args.smoothness)
    say(f"predicted exponent 2s/(2s+d) = {b:.3f} (d = {args.dimension:g}, s = {args.smoothness:g})"
        + (f"; ambient 2s/(2s+D) = {ambient_exponent(D, args.smoothness):.3f} (D = {D})" if args.ambient_dim else ""))
    say(f"if the error falls as C n^-{b:.3f}: halving it needs {fmt_number(2 ** (1 / b))}x the samples, a tenth needs "
        f"{fmt_number(10 ** (1 / b))}x. The constant C needs a measured curve: run `manireg curves`, then `manireg plan`.")
    table = sizing_table(args.sizes if args.sizes else [1e2, 1e3, 1e4, 1e5], args.dimension, args.smoothness, D,
                         constants=constants)
    from .. import style

    frame = table.to_frame()
    frame.columns = [style.plain_label(c) for c in frame.columns]
    say()
    say(frame.to_string(index=False, float_format=lambda v: style.fmt_number(v, 4)))
    if any(w >= constants.width_max for w in table.to_frame()["width"]):
        say(f"(widths at {constants.width_max} are held at the cap width_max; pass --sizing width_max=... to raise it)")
    return 0
