"""The ``manireg`` command line. Thin: it parses arguments, calls core functions and prints their results.

Every command returns an exit code: 0 on success, 2 with a one-line reason on bad input.
"""

from __future__ import annotations

import argparse
import json
import os
import sys

__all__ = ["main"]


class UsageError(Exception):
    """Bad input from the user: printed as one line, exit code 2."""


def _out_dir(path: str) -> str:
    try:
        os.makedirs(path, exist_ok=True)
    except OSError as exc:
        raise UsageError(f"cannot create output folder '{path}': {exc.strerror}. Pass a writable --out folder.") from None
    if not os.access(path, os.W_OK):
        raise UsageError(f"output folder '{path}' is not writable. Pass a writable --out folder.")
    return path


def _write_json(path: str, data: dict) -> None:
    with open(path, "w") as fh:
        json.dump(data, fh, indent=2, allow_nan=False)


def cmd_demo(args) -> int:
    from .data import pebble_scenario

    out = _out_dir(args.out)
    n = 1500 if args.quick else 4000
    reg = pebble_scenario(n, seed=args.seed)
    m = reg.manifold
    summary = {
        "scenario": "pebble renderings",
        "n_samples": int(reg.X.shape[0]),
        "ambient_dim": int(m.ambient_dim),
        "true_dimension": int(m.dimension),
        "smoothness": reg.smoothness,
        "noise_variance": reg.noise_variance,
        "seed": args.seed,
    }
    _write_json(os.path.join(out, "summary.json"), summary)
    print(f"demo scenario: {summary['n_samples']} images of {m.image_shape[0]}x{m.image_shape[1]} pixels (D = {m.ambient_dim}), "
          f"true intrinsic dimension {m.dimension}, target smoothness s = {reg.smoothness}, noise variance {reg.noise_variance:g}")
    print(f"summary written to {os.path.join(out, 'summary.json')}")
    return 0


def build_parser() -> argparse.ArgumentParser:
    from . import __version__

    parser = argparse.ArgumentParser(
        prog="manireg",
        description="Intrinsic geometry, network sizing and learning-curve studies for regression on data near a manifold.",
    )
    parser.add_argument("--version", action="version", version=f"manireg {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    p = sub.add_parser("demo", help="run the whole job on the built-in pebble-image scenario")
    p.add_argument("--out", default="manireg-out/demo", help="folder for the report (default: %(default)s)")
    p.add_argument("--quick", action="store_true", help="small settings, about a minute")
    p.add_argument("--seed", type=int, default=0, help="seed of every random step (default: %(default)s)")
    p.set_defaults(func=cmd_demo)
    return parser


def main(argv=None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "func", None):
        parser.print_help()
        return 2
    try:
        return args.func(args)
    except UsageError as exc:
        print(f"manireg {args.command}: error: {exc}", file=sys.stderr)
        return 2
    except ValueError as exc:  # validation errors from the core name the problem and the fix
        print(f"manireg {args.command}: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print(f"manireg {args.command}: interrupted; finished work is kept.", file=sys.stderr)
        return 130


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
