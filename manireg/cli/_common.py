"""What every command shares: errors, output folders, data loading, progress, messages, option parsing.

Messages follow one style: an error is ``manireg COMMAND: error: ...`` on standard error (exit 2); a warning
is ``warning: ...`` on one line, whatever part of manireg or a library raised it; nothing else reaches the
screen (no raw Python warning, no library chatter).
"""

from __future__ import annotations

import contextlib
import json
import os
import sys
import warnings

__all__ = ["UsageError", "out_dir", "write_json", "load", "say", "warn", "steps_bar", "captured_warnings",
           "parse_floor_option", "parse_sizing", "add_data_options", "add_run_options", "add_floor_option",
           "WARNING_PREFIX"]

from ..style import WARNING_PREFIX  # the one prefix of every warning line (CLI and panels)


class UsageError(Exception):
    """Bad input from the user: printed as one line, exit code 2."""


def say(text: str = "") -> None:
    print(text, flush=True)


def warn(message: str) -> None:
    say(WARNING_PREFIX + " ".join(str(message).split()))


@contextlib.contextmanager
def captured_warnings():
    """Every Python warning raised inside becomes one ``warning: ...`` line (each message once)."""
    seen = set()

    def show(message, category, filename, lineno, file=None, line=None):
        text = " ".join(str(message).split())
        if issubclass(category, (DeprecationWarning, PendingDeprecationWarning, ImportWarning, FutureWarning)):
            return  # library housekeeping, not about the user's data
        if "matplotlib" in str(filename):
            return  # drawing notes (an empty legend, a tight layout) say nothing about the data
        if text not in seen:
            seen.add(text)
            warn(text)

    with warnings.catch_warnings():
        warnings.simplefilter("always")
        warnings.showwarning = show
        yield


def quiet_libraries() -> None:
    """Silence third-party chatter a user cannot act on (log lines, compilation notes)."""
    import logging

    for name in ("numba", "pynndescent", "umap", "distributed", "matplotlib", "PIL"):
        logging.getLogger(name).setLevel(logging.ERROR)
    os.environ.setdefault("TF_CPP_MIN_LOG_LEVEL", "3")


def out_dir(path: str) -> str:
    try:
        os.makedirs(path, exist_ok=True)
    except OSError as exc:
        raise UsageError(f"cannot create output folder '{path}': {exc.strerror}. Pass a writable --out folder.") from None
    probe = os.path.join(path, ".manireg-write-test")
    try:
        with open(probe, "w") as fh:
            fh.write("")
        os.remove(probe)
    except OSError as exc:
        raise UsageError(f"output folder '{path}' is not writable ({exc.strerror}). Pass a writable --out folder.") from None
    return path


def write_json(path: str, data: dict) -> None:
    from .._results import to_jsonable

    with open(path, "w") as fh:
        json.dump(to_jsonable(data), fh, indent=2, allow_nan=False)


def load(args, *, target_required: bool):
    """The user's table with the options --target, --features and --drop."""
    from ..data import load_table

    target = getattr(args, "target", None)
    if target_required and target is None:
        raise UsageError("pass --target COL: the column to learn.")
    table = load_table(args.data, target=target, features=getattr(args, "features", None), drop=getattr(args, "drop", None))
    say(f"data: {table.n_samples:,} rows x {table.X.shape[1]} feature columns from {args.data}"
        + (f"; target '{table.target_name}'" if table.target_name else ""))
    return table


def steps_bar(steps, enabled: bool, desc: str):
    """A progress bar over named steps; returns (callback, close). The bar names the step in progress."""
    from tqdm.auto import tqdm

    bar = tqdm(total=len(steps), desc=desc, disable=not enabled, leave=False, file=sys.stderr,
               bar_format="{desc}: {n_fmt}/{total_fmt} steps [{elapsed}] {postfix}")

    def callback(name):
        bar.set_postfix_str(f"now: {name}")
        if bar.n < bar.total and getattr(callback, "started", False):
            bar.update(1)
        callback.started = True

    def close():
        bar.update(bar.total - bar.n)
        bar.close()

    return callback, close


def parse_floor_option(text):
    from ..curves.floors import parse_floor

    try:
        return parse_floor(text)
    except ValueError as exc:
        raise UsageError(f"--floor: {exc}") from None


def parse_sizing(items) -> dict:
    """``["c_width=4", "width_max=1024"]`` -> a dict of sizing constants, checked against SizingConstants."""
    import dataclasses

    from ..theory.sizing import SizingConstants

    known = [f.name for f in dataclasses.fields(SizingConstants)]
    out = {}
    for item in items or []:
        key, sep, value = item.partition("=")
        key = key.strip()
        if not sep:
            raise UsageError(f"--sizing takes NAME=VALUE pairs (e.g. c_width=4); got '{item}'.")
        if key not in known:
            import difflib

            close = difflib.get_close_matches(key, known, n=1)
            hint = f" Did you mean '{close[0]}'?" if close else ""
            raise UsageError(f"--sizing: unknown constant '{key}'.{hint} Known: {', '.join(known)}.")
        try:
            out[key] = int(value) if value.strip().lstrip("-").isdigit() else float(value)
        except ValueError:
            raise UsageError(f"--sizing {key}: the value must be a number; got '{value}'.") from None
    if out:
        try:
            SizingConstants(**out)
        except (TypeError, ValueError) as exc:
            raise UsageError(f"--sizing: {exc}") from None
    return out


# ------------------------------------------------------------------------------------------------ options
def add_data_options(p, *, target_required: bool) -> None:
    p.add_argument("data", help="the table: CSV, Parquet, NPZ or NPY file")
    if target_required:
        p.add_argument("--target", required=True, metavar="COL", help="the column to learn")
    else:
        p.add_argument("--target", metavar="COL", help="target column (colours the 2-D view; left out of the geometry)")
    g = p.add_mutually_exclusive_group()
    g.add_argument("--features", nargs="+", metavar="COL", help="use only these feature columns")
    g.add_argument("--drop", nargs="+", metavar="COL", help="leave these columns out of the features (an ID column, a date)")


def add_run_options(p, out_default: str) -> None:
    p.add_argument("--out", default=out_default, metavar="DIR", help="output folder (default: %(default)s)")
    p.add_argument("--seed", type=int, default=0, help="seed of every random step (default: %(default)s)")
    p.add_argument("--quiet", action="store_true", help="no progress bars")


def add_floor_option(p) -> None:
    from ..curves.floors import DEFAULT_FLOOR

    p.add_argument("--floor", default=DEFAULT_FLOOR, metavar="none|fit|estimate|VALUE",
                   help="error floor of the exponent fits: none, fit (fitted with the curve), estimate (the campaign's "
                        "noise-variance estimate) or a number you give (default: %(default)s)")


def add_store_options(p, *, required: bool, default_hint: str = "") -> None:
    p.add_argument("--store", required=required, metavar="FILE",
                   help="the campaign store (SQLite)" + (f" (default: {default_hint})" if default_hint else ""))
    p.add_argument("--campaign", metavar="NAME", help="campaign name in the store (may be left out when the store holds one)")
