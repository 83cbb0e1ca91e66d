"""Checks at the boundary of the core: every public entry point validates its input here.

Messages say what is wrong, what is allowed, what was received and how to fix it.
"""

from __future__ import annotations

import numbers
import warnings

import numpy as np

__all__ = [
    "check_points",
    "check_target",
    "check_int",
    "check_float",
    "check_choice",
    "make_rng",
    "DataValidationError",
]


class DataValidationError(ValueError):
    """Raised for bad data (shape, NaN/inf, too few rows, ...). A ``ValueError`` subclass."""


def _locate_nonfinite(arr: np.ndarray, limit: int = 5) -> str:
    bad = np.argwhere(~np.isfinite(arr))
    where = ", ".join(str(tuple(int(i) for i in row)) for row in bad[:limit])
    more = "" if len(bad) <= limit else f" and {len(bad) - limit} more"
    return f"{len(bad)} non-finite value(s) (NaN or inf) at index {where}{more}"


def _as_float(X, name: str, prefix: str, fix: str, to=np.float64) -> np.ndarray:
    """``X`` as float64 (or ``to``), refusing what a silent cast would get wrong (sparse, complex, non-numeric)."""
    if hasattr(X, "tocsr") or hasattr(X, "todense"):
        raise DataValidationError(
            f"{prefix}{name} is a sparse matrix ({type(X).__name__}); manireg works on dense arrays. "
            f"Pass {name}.toarray() (or reduce the columns first if that does not fit in memory)."
        )
    dtype = getattr(X, "dtype", None)
    if dtype is None:
        X = np.asarray(X)
        dtype = X.dtype
    if np.issubdtype(np.dtype(dtype) if not hasattr(dtype, "kind") else dtype, np.complexfloating):
        raise DataValidationError(
            f"{prefix}{name} holds complex numbers; casting them to real would drop the imaginary part. "
            f"Pass real features, e.g. np.column_stack([{name}.real, {name}.imag])."
        )
    try:
        return np.asarray(X, dtype=to)
    except (TypeError, ValueError) as exc:
        raise DataValidationError(f"{prefix}{name} must be numeric; could not convert it to float ({exc}). {fix}") from None


def check_points(X, *, name: str = "X", min_samples: int = 2, owner: str | None = None, dtype=np.float64) -> np.ndarray:
    """Return ``X`` as a C-contiguous float64 (or ``dtype``) array of shape (n_samples, n_features).

    Raises :class:`DataValidationError` for non-numeric data, the wrong number of dimensions, NaN or
    inf (with how many and where), or fewer than ``min_samples`` rows.
    """
    prefix = f"{owner}: " if owner else ""
    arr = _as_float(X, name, prefix, "Drop or encode non-numeric columns first.", dtype)
    if arr.ndim == 1:
        raise DataValidationError(
            f"{prefix}{name} must be 2-D (n_samples, n_features); got a 1-D array of length {arr.shape[0]}. "
            "Use X.reshape(-1, 1) for a single feature or X.reshape(1, -1) for a single sample."
        )
    if arr.ndim != 2:
        raise DataValidationError(
            f"{prefix}{name} must be 2-D (n_samples, n_features); got an array with shape {arr.shape}. "
            "Flatten each sample first, e.g. X.reshape(len(X), -1)."
        )
    if arr.shape[1] == 0:
        raise DataValidationError(f"{prefix}{name} has no columns (shape {arr.shape}); pass at least one feature.")
    if arr.shape[0] < min_samples:
        raise DataValidationError(
            f"{prefix}{name} has {arr.shape[0]} row(s); at least {min_samples} are needed. Pass more samples."
        )
    if not np.all(np.isfinite(arr)):
        raise DataValidationError(
            f"{prefix}{name} has {_locate_nonfinite(arr)}. Remove or impute those entries first."
        )
    return np.ascontiguousarray(arr)


def check_target(y, n_samples: int, *, name: str = "y", owner: str | None = None) -> np.ndarray:
    """Return ``y`` as a float64 vector of length ``n_samples`` (a (n, 1) column is accepted)."""
    prefix = f"{owner}: " if owner else ""
    arr = _as_float(y, name, prefix, "Pass one numeric target column.")
    if arr.ndim == 2 and arr.shape[1] == 1:
        arr = arr[:, 0]
    if arr.ndim != 1:
        raise DataValidationError(
            f"{prefix}{name} must be a 1-D target vector; got shape {arr.shape}. Pass one target column."
        )
    if arr.shape[0] != n_samples:
        raise DataValidationError(
            f"{prefix}{name} has {arr.shape[0]} values but X has {n_samples} rows; they must match."
        )
    if not np.all(np.isfinite(arr)):
        raise DataValidationError(f"{prefix}{name} has {_locate_nonfinite(arr)}. Remove those rows first.")
    return np.ascontiguousarray(arr)


def check_int(value, name: str, *, owner: str, low: int | None = None, high: int | None = None) -> int:
    """Check an integer parameter; the message names the parameter, its owner and the allowed range."""
    ok = isinstance(value, numbers.Integral) and not isinstance(value, bool)
    if ok and low is not None and value < low:
        ok = False
    if ok and high is not None and value > high:
        ok = False
    if not ok:
        rng = _range_text(low, high)
        raise ValueError(f"the '{name}' parameter of {owner} must be an int{rng}; got {value!r}.")
    return int(value)


def check_float(
    value,
    name: str,
    *,
    owner: str,
    low: float | None = None,
    high: float | None = None,
    low_open: bool = False,
    high_open: bool = False,
) -> float:
    """Check a real parameter against an interval (closed unless ``*_open``)."""
    ok = isinstance(value, numbers.Real) and not isinstance(value, bool) and np.isfinite(value)
    if ok and low is not None and (value < low or (low_open and value == low)):
        ok = False
    if ok and high is not None and (value > high or (high_open and value == high)):
        ok = False
    if not ok:
        lo = "" if low is None else f"{'>' if low_open else '>='} {low}"
        hi = "" if high is None else f"{'<' if high_open else '<='} {high}"
        rng = " and ".join(p for p in (lo, hi) if p)
        raise ValueError(f"the '{name}' parameter of {owner} must be a finite real{' ' + rng if rng else ''}; got {value!r}.")
    return float(value)


def check_choice(value, name: str, *, owner: str, choices) -> str:
    """Check that ``value`` is one of ``choices``."""
    if value not in choices:
        allowed = ", ".join(repr(c) for c in choices)
        raise ValueError(f"the '{name}' parameter of {owner} must be one of {allowed}; got {value!r}.")
    return value


def _range_text(low, high) -> str:
    if low is not None and high is not None:
        return f" in [{low}, {high}]"
    if low is not None:
        return f" >= {low}"
    if high is not None:
        return f" <= {high}"
    return ""


def make_rng(seed) -> np.random.Generator:
    """A numpy Generator from an int seed, ``None`` (fresh entropy) or an existing Generator."""
    if isinstance(seed, np.random.Generator):
        return seed
    if seed is None or (isinstance(seed, numbers.Integral) and not isinstance(seed, bool) and seed >= 0):
        return np.random.default_rng(seed)
    raise ValueError(f"seed must be a non-negative int, None or a numpy Generator; got {seed!r}.")


def warn(message: str, category=UserWarning, stacklevel: int = 3) -> None:
    """Emit a warning from the core (the only place the core talks to the user)."""
    warnings.warn(message, category, stacklevel=stacklevel)
