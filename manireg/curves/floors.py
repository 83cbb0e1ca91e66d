"""The error floor of a learning-curve fit: one set of choices with one meaning on every surface.

The Python API, the command line (``--floor``), the curve panel and the report all pass their choice
through :func:`resolve_floor`, so the same rows give the same fit wherever they are read.

========== ===================================================================================
choice     meaning
========== ===================================================================================
none       no floor: a straight line in log-log
fit        the floor ``c >= 0`` is fitted with the curve
estimate   the campaign's noise-variance estimate (the default): the irreducible part of the
           test error against noisy targets
a number   a floor the user gives (the demo passes the true noise variance of its synthetic data)
========== ===================================================================================
"""

from __future__ import annotations

import math
import numbers

__all__ = ["DEFAULT_FLOOR", "FLOOR_CHOICES", "resolve_floor", "parse_floor", "describe_floor"]

#: The floor every surface uses unless told otherwise.
DEFAULT_FLOOR = "estimate"
#: The named choices (a non-negative number is the fourth kind).
FLOOR_CHOICES = ("none", "fit", "estimate")


def parse_floor(value):
    """A floor choice from user text or a Python value: ``None``/"none", "fit", "estimate" or a float >= 0.

    Raises
    ------
    ValueError
        Naming the choices, for anything else (a negative or non-finite number included).
    """
    if value is None:
        return "none"
    if isinstance(value, str):
        text = value.strip().lower()
        if text in FLOOR_CHOICES:
            return text
        try:
            value = float(text)
        except ValueError:
            raise ValueError(
                f"the floor must be one of {', '.join(FLOOR_CHOICES)} or a number >= 0; got {value!r}."
            ) from None
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise ValueError(f"the floor must be one of {', '.join(FLOOR_CHOICES)} or a number >= 0; got {value!r}.")
    value = float(value)
    if not math.isfinite(value) or value < 0:
        raise ValueError(f"a floor value must be a finite number >= 0; got {value!r}.")
    return value


def resolve_floor(choice, noise_estimate=None):
    """``(floor, extra)`` for :func:`manireg.curves.fitting.fit_exponent` from a floor choice.

    Parameters
    ----------
    choice : None, "none", "fit", "estimate" or float
        See the module table.
    noise_estimate : float, optional
        The campaign's noise-variance estimate (needed by "estimate").

    Returns
    -------
    floor : None, "fit", "estimate" or float
    extra : dict
        Further keyword arguments of the fit (``noise_variance`` for "estimate").

    Raises
    ------
    ValueError
        For an unknown choice, or "estimate" without a noise estimate.
    """
    choice = parse_floor(choice)
    if choice == "none":
        return None, {}
    if choice == "fit":
        return "fit", {}
    if choice == "estimate":
        if noise_estimate is None or not math.isfinite(float(noise_estimate)):
            raise ValueError("the 'estimate' floor needs the campaign's noise-variance estimate and none is recorded; "
                             "run the campaign again to record it, or choose the floor 'fit', 'none' or a value.")
        return "estimate", {"noise_variance": float(noise_estimate)}
    return float(choice), {}


def describe_floor(choice) -> str:
    """Plain words for a floor choice (report settings, panel captions)."""
    choice = parse_floor(choice)
    if isinstance(choice, float):
        return f"given value {choice:.4g}"
    return {"none": "none", "fit": "fitted with the curve", "estimate": "noise-variance estimate"}[choice]
