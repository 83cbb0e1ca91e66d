"""Loading a user's table: CSV, Parquet, NPZ or NPY, validated at the boundary."""

from __future__ import annotations

import os
from dataclasses import dataclass, field

import numpy as np

from .._results import ResultMixin
from .._validation import DataValidationError, warn

__all__ = ["Table", "load_table", "SUPPORTED_FORMATS"]

SUPPORTED_FORMATS = (".csv", ".parquet", ".pq", ".npz", ".npy", ".zarr")


@dataclass
class Table(ResultMixin):
    """A loaded data set: float arrays ``X`` (n, D) and ``y`` (n,) or ``None``, with column names."""

    X: np.ndarray = field(repr=False)
    y: np.ndarray | None = field(repr=False)
    feature_names: list
    target_name: str | None
    source: str
    _skip_in_dict = ("X", "y")

    @property
    def n_samples(self) -> int:
        return self.X.shape[0]


def load_table(path, target: str | int | None = None, *, features=None, drop=None) -> Table:
    """Load ``path`` into float arrays.

    Parameters
    ----------
    path : str or os.PathLike
        ``.csv`` (header row required), ``.parquet``/``.pq``, ``.npz`` (arrays ``X`` and optionally ``y``,
        or named 1-D arrays used as columns), ``.npy`` (a 2-D array; columns are ``c0, c1, ...``) or ``.zarr``
        (a group with ``X`` and ``y``; needs the zarr package). For files larger than memory use
        :func:`manireg.data.open_table`, which reads rows on demand.
    target : column name (or integer position for ``.npy``), optional
        The regression target; ``None`` loads features only.
    features : list of column names, optional
        Feature columns to keep (default: every column but the target and ``drop``). Command line:
        ``--features COL ...``.
    drop : list of column names, optional
        Columns to leave out of the features (an ID column, a date). Command line: ``--drop COL ...``.

    Raises
    ------
    ValueError (DataValidationError)
        Missing file, unknown format, empty file, missing target column, non-numeric columns, NaN or inf
        (with count and location), fewer than 2 rows, mismatched lengths, a column that looks like a row
        identifier (named like an ID and holding distinct integers) among the features unless ``features``
        names it. A misspelt column name gets the closest existing names suggested. Constant columns only
        warn.
    """
    from .lazy import check_data_path, open_table

    p = os.fspath(path)
    ext = check_data_path(p, SUPPORTED_FORMATS)
    if ext == ".zarr":
        lazy = open_table(p, target, features=features, drop=drop)
        names, X, y, tname = lazy.feature_names, lazy.to_array(), lazy.target(), lazy.target_name
    elif ext in (".csv", ".parquet", ".pq"):
        frame = _read_frame(p, ext)
        names, X, y, tname = _split_frame(frame, target, features, p, drop)
    elif ext == ".npz":
        if drop:
            raise DataValidationError("drop= (--drop) selects columns of a CSV or Parquet table; slice the arrays of an .npz/.npy file instead.")
        names, X, y, tname = _read_npz(p, target, features)
    else:
        names, X, y, tname = _read_npy(p, target)
    X, y = _validate(X, y, names, tname, p)
    return Table(X, y, list(names), tname, p)


def _read_frame(p, ext):
    import pandas as pd

    try:
        if ext == ".csv":
            return pd.read_csv(p)
        return pd.read_parquet(p)
    except pd.errors.EmptyDataError:
        raise DataValidationError(f"'{p}' has no columns (an empty CSV). Write a header row and data.") from None
    except Exception as exc:  # parser errors of any kind: say what the reader said
        raise DataValidationError(f"could not read '{p}' as {ext[1:]}: {exc}") from None


def _suggest(name, cols) -> str:
    """' Did you mean 'y'?' for a misspelt column name, or ''."""
    import difflib

    lower = {c.lower(): c for c in cols}
    close = [lower[m] for m in difflib.get_close_matches(str(name).lower(), list(lower), n=3, cutoff=0.5)]
    return f" Did you mean {' or '.join(repr(c) for c in close)}?" if close else ""


_ID_NAMES = ("id", "index", "idx", "key", "row", "sample", "unnamed: 0")


def _named_like_id(name: str) -> bool:
    low = name.strip().lower()
    return low in _ID_NAMES or low.endswith(("_id", " id", "-id")) or low.startswith(("id_", "id ")) or low.endswith("id") and len(low) <= 4


def _id_columns_error(ids, p, seen=""):
    return DataValidationError(
        f"column(s) {_preview(ids)} in '{p}' look like row identifiers (named like an ID, distinct integers{seen}) "
        f"and would be used as coordinates. Leave them out with --drop {' '.join(ids[:3])} (drop=[...] in "
        "Python), or name every feature with --features COL ... (features=[...]) to keep them."
    )


def _looks_like_id(name: str, values) -> bool:
    """A column named like a row identifier whose values are distinct integers (common practice: such a
    column numbers the rows and carries no geometry)."""
    if not _named_like_id(name):
        return False
    v = np.asarray(values, dtype=float)
    return bool(np.all(np.isfinite(v)) and np.all(v == np.round(v)) and np.unique(v).size == v.size)


def _split_frame(frame, target, columns, p, drop=None):
    if frame.shape[1] == 0:
        raise DataValidationError(f"'{p}' has no columns. Write a header row and data.")
    if frame.shape[0] < 2:
        raise DataValidationError(f"'{p}' has {frame.shape[0]} data row(s); at least 2 are needed.")
    cols = [str(c) for c in frame.columns]
    frame.columns = cols
    y = None
    tname = None
    if target is not None:
        tname = str(target)
        if tname not in cols:
            raise DataValidationError(
                f"target column '{tname}' is not in '{p}'.{_suggest(tname, cols)} Columns are: {_preview(cols)}. "
                "Pass one of them with --target COL (target=... in Python)."
            )
        y = frame[tname]
    if columns is not None:
        missing = [c for c in columns if str(c) not in cols]
        if missing:
            raise DataValidationError(f"feature column(s) {missing} are not in '{p}'.{_suggest(missing[0], cols)} "
                                      f"Columns are: {_preview(cols)}.")
        feats = [str(c) for c in columns]
    else:
        dropped = [str(c) for c in (drop or [])]
        missing = [c for c in dropped if c not in cols]
        if missing:
            raise DataValidationError(f"column(s) {missing} to drop are not in '{p}'.{_suggest(missing[0], cols)} "
                                      f"Columns are: {_preview(cols)}.")
        feats = [c for c in cols if c != tname and c not in dropped]
    if not feats:
        raise DataValidationError(f"'{p}' has no feature columns besides the target '{tname}'. Add features.")
    import pandas as pd

    nonnum = [c for c in feats if not pd.api.types.is_numeric_dtype(frame[c]) or pd.api.types.is_bool_dtype(frame[c])]
    if nonnum:
        raise DataValidationError(
            f"non-numeric feature column(s) in '{p}': {_preview(nonnum)}. Leave them out with --drop "
            f"{' '.join(nonnum[:3])} (drop=[...] in Python), choose the features with --features COL ... "
            "(features=[...]), or encode them as numbers."
        )
    if columns is None:
        ids = [c for c in feats if _looks_like_id(c, frame[c])]
        if ids:
            raise _id_columns_error(ids, p)
    if y is not None and not pd.api.types.is_numeric_dtype(y):
        raise DataValidationError(f"target column '{tname}' in '{p}' is not numeric. A regression target must be numbers.")
    X = frame[feats].to_numpy(dtype=np.float64)
    yv = None if y is None else y.to_numpy(dtype=np.float64)
    return feats, X, yv, tname


def _read_npz(p, target, columns):
    try:
        with np.load(p, allow_pickle=False) as z:
            arrays = {k: z[k] for k in z.files}
    except Exception as exc:
        raise DataValidationError(f"could not read '{p}' as .npz: {exc}") from None
    if not arrays:
        raise DataValidationError(f"'{p}' holds no arrays. Save X (and y) with numpy.savez.")
    tkey = "y" if target is None and "y" in arrays else target
    if "X" in arrays:
        X = arrays["X"]
        if X.ndim != 2:
            raise DataValidationError(f"array 'X' in '{p}' must be 2-D (n_samples, n_features); got shape {X.shape}.")
        names = [f"x{j}" for j in range(X.shape[1])]
        if tkey is not None and tkey not in arrays:
            raise DataValidationError(f"target array '{tkey}' is not in '{p}'; arrays are: {_preview(list(arrays))}.")
        y = None if tkey is None else arrays[tkey]
        if columns is not None:
            raise DataValidationError("features= selects named 1-D arrays; this .npz holds one 2-D array 'X'. Slice X instead.")
        return names, _numeric(X, p, "X"), (None if y is None else _numeric(y, p, str(tkey))), (None if tkey is None else str(tkey))
    # named 1-D arrays as columns
    if target is not None and target not in arrays:
        raise DataValidationError(f"target array '{target}' is not in '{p}'; arrays are: {_preview(list(arrays))}.")
    feats = [k for k in (columns or arrays) if k != target]
    lengths = {k: len(np.atleast_1d(arrays[k])) for k in feats + ([target] if target is not None else [])}
    if len(set(lengths.values())) > 1:
        raise DataValidationError(f"arrays in '{p}' have different lengths {lengths}; every column must have one value per row.")
    X = np.column_stack([_numeric(arrays[k], p, k) for k in feats])
    y = None if target is None else _numeric(arrays[target], p, target)
    return feats, X, y, target


def _read_npy(p, target):
    try:
        arr = np.load(p, allow_pickle=False)
    except Exception as exc:
        raise DataValidationError(f"could not read '{p}' as .npy: {exc}") from None
    arr = _numeric(arr, p, "array")
    if arr.ndim != 2:
        raise DataValidationError(f"the array in '{p}' must be 2-D (n_samples, n_columns); got shape {arr.shape}.")
    names = [f"c{j}" for j in range(arr.shape[1])]
    if target is None:
        return names, arr, None, None
    idx = target
    if isinstance(target, str):
        if target not in names:
            raise DataValidationError(f"target '{target}' is not a column of '{p}'; .npy columns are c0..c{arr.shape[1] - 1} or an integer position.")
        idx = names.index(target)
    if not (isinstance(idx, (int, np.integer)) and -arr.shape[1] <= idx < arr.shape[1]):
        raise DataValidationError(f"target position {target!r} is outside the {arr.shape[1]} columns of '{p}'.")
    idx = int(idx) % arr.shape[1]
    keep = [j for j in range(arr.shape[1]) if j != idx]
    return [names[j] for j in keep], arr[:, keep], arr[:, idx], names[idx]


def _numeric(a, p, name):
    a = np.asarray(a)
    if not np.issubdtype(a.dtype, np.number) or np.issubdtype(a.dtype, np.complexfloating):
        raise DataValidationError(f"array '{name}' in '{p}' is not numeric (dtype {a.dtype}). Save numbers only.")
    return a.astype(np.float64)


def _validate(X, y, names, tname, p):
    n = X.shape[0]
    if y is not None and len(y) != n:
        raise DataValidationError(f"'{p}': the target has {len(y)} values but there are {n} feature rows; they must match.")
    if n < 2:
        raise DataValidationError(f"'{p}' has {n} data row(s); at least 2 are needed.")
    bad = ~np.isfinite(X)
    if bad.any():
        rows, cols = np.nonzero(bad)
        per_col = {}
        for c in cols:
            per_col[names[c]] = per_col.get(names[c], 0) + 1
        where = ", ".join(f"'{k}': {v}" for k, v in list(per_col.items())[:5])
        raise DataValidationError(
            f"'{p}' has {int(bad.sum())} missing or infinite value(s) (NaN/inf) in features ({where}); first at row {int(rows[0])}. "
            "Drop or impute those rows first."
        )
    if y is not None and not np.all(np.isfinite(y)):
        rows = np.nonzero(~np.isfinite(y))[0]
        raise DataValidationError(
            f"'{p}': target '{tname}' has {len(rows)} missing or infinite value(s) (NaN/inf); first at row {int(rows[0])}. Drop those rows first."
        )
    const = [names[j] for j in range(X.shape[1]) if np.ptp(X[:, j]) == 0]
    if const:
        warn(f"'{p}': constant column(s) {_preview(const)} carry no information; consider dropping them.", stacklevel=3)
    return X, y


def _preview(items, limit=8):
    items = list(items)
    text = ", ".join(repr(i) for i in items[:limit])
    return text + (f", ... ({len(items)} in all)" if len(items) > limit else "")
