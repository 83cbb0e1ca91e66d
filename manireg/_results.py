"""Shared behaviour of result dataclasses: ``to_dict()`` (JSON-ready) and ``to_frame()``."""

from __future__ import annotations

import dataclasses
import math

import numpy as np


def to_jsonable(value):
    """Convert numpy scalars/arrays, dataclasses, dicts and sequences to plain JSON-ready Python.

    Non-finite floats become ``None`` (JSON has no NaN), so a stored summary never carries NaN.
    """
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        if hasattr(value, "to_dict"):
            return value.to_dict()
        return {f.name: to_jsonable(getattr(value, f.name)) for f in dataclasses.fields(value)}
    if isinstance(value, dict):
        return {str(k): to_jsonable(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [to_jsonable(v) for v in value]
    if isinstance(value, np.ndarray):
        return to_jsonable(value.tolist())
    if isinstance(value, (np.integer,)):
        return int(value)
    if isinstance(value, (np.floating, float)):
        v = float(value)
        return v if math.isfinite(v) else None
    if isinstance(value, np.bool_):
        return bool(value)
    try:
        import pandas as pd

        if isinstance(value, pd.DataFrame):
            return to_jsonable(value.to_dict(orient="records"))
    except ImportError:  # pragma: no cover - pandas is a dependency
        pass
    return value


class ResultMixin:
    """Mixin for result dataclasses. Fields listed in ``_skip_in_dict`` are left out of ``to_dict``
    (large arrays, for example); subclasses override ``to_frame``."""

    _skip_in_dict: tuple = ()

    def to_dict(self) -> dict:
        return {
            f.name: to_jsonable(getattr(self, f.name))
            for f in dataclasses.fields(self)
            if f.name not in self._skip_in_dict
        }

    def to_frame(self):
        """One-row DataFrame of the scalar fields (override for tabular results)."""
        import pandas as pd

        row = {k: v for k, v in self.to_dict().items() if not isinstance(v, (list, dict))}
        return pd.DataFrame([row])
