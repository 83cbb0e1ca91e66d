"""The ``manireg`` command line. Thin: it parses arguments, calls core functions and prints their results.

Commands (one module each): ``demo``, ``geometry``, ``curves``, ``policy``, ``size``, ``plan``, ``report``, ``track``. Every command
returns an exit code: 0 on success, 2 with a one-line reason on bad input (never a traceback for a user
error), 130 when interrupted (finished cells are kept in the store; running again resumes).
"""

from __future__ import annotations

import argparse
import sys

from ._common import UsageError, captured_warnings, quiet_libraries
from . import curves, demo, geometry, plan, policy, report, size, track

__all__ = ["main", "build_parser", "COMMANDS", "RENAMED"]

#: The command modules, in the order ``--help`` lists them.
COMMANDS = (demo, geometry, curves, policy, size, plan, report, track)

#: Options and commands of earlier versions -> what replaced them (named in one extra line after argparse's error).
RENAMED = {
    "study": "curves", "--label": "--campaign", "--study": "--campaign", "--from-store": "--store",
    "--input-dim": "--ambient-dim", "--n": "--sizes", "--no-embed": "--no-view",
}


def build_parser() -> argparse.ArgumentParser:
    from .. import __version__

    parser = argparse.ArgumentParser(
        prog="manireg",
        description="Intrinsic geometry, network sizing and learning-curve campaigns for data near a manifold.",
    )
    parser.add_argument("--version", action="version", version=f"manireg {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for module in COMMANDS:
        module.add_parser(sub)
    return parser


def _renamed_hint(argv) -> None:
    for token in argv:
        old = token.split("=", 1)[0]
        if old in RENAMED:
            print(f"manireg: '{old}' is now '{RENAMED[old]}'.", file=sys.stderr)


def main(argv=None) -> int:
    argv = list(sys.argv[1:] if argv is None else argv)
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:
        if exc.code not in (0, None):
            _renamed_hint(argv)
        return int(exc.code or 0)
    if not getattr(args, "func", None):
        parser.print_help()
        return 2
    quiet_libraries()
    try:
        with captured_warnings():
            return args.func(args)
    except (UsageError, ValueError, FileNotFoundError) as exc:
        # validation errors from the core name the problem and the fix; keep them to one line
        msg = " ".join(str(exc).split())
        print(f"manireg {args.command}: error: {msg}", file=sys.stderr)
        return 2
    except BrokenPipeError:
        # the reader went away (e.g. `manireg size ... | head`): stop quietly, as the Python docs advise
        import os

        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 1
    except KeyboardInterrupt:
        print(f"manireg {args.command}: interrupted; finished cells are kept in the store, run the same command "
              "again to resume.", file=sys.stderr)
        return 130


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
