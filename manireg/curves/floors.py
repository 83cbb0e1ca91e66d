"""The error floor of a learning-curve fit: one set of choices with one meaning on every surface.

The Python API, the command line (``--floor``), the curve panel and the report all pass their choice
through :func:`choose_floor`, so the same rows give the same fit wherever they are read.

========== ===================================================================================
choice     meaning
========== ===================================================================================
none       no floor: a straight line in log-log
fit        the floor ``c >= 0`` is fitted with the curve on every replicate, within the interval of the
           campaign's noise-variance estimate (the default)
estimate   the campaign's noise-variance estimate itself: the irreducible part of the test error
           against noisy targets; biased high on rough targets, which steepens the curve
a number   a floor the user gives (the demo passes the true noise variance of its synthetic data)
========== ===================================================================================
"""

from __future__ import annotations

import math
import numbers

__all__ = ["DEFAULT_FLOOR", "FLOOR_CHOICES", "choose_floor", "parse_floor", "describe_floor"]

#: The floor every surface uses unless told otherwise. Chosen by measurement (docs/fitting.md, "Which floor by
#: default"; ``python docs/scripts/floor_choice.py``): on kNN curves of generator data with a known noise
#: variance, the fitted floor gave the exponent of the true floor within 0.02 on every row, while the
#: noise estimate as the floor steepened rough targets (s = 0.5) by 0.1-0.2 and no floor flattened curves
#: whose noise is large against the excess error.
DEFAULT_FLOOR = "fit"
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


def choose_floor(choice, metric: str = "test_mse", noise_estimate=None):
    """``(floor, noise_variance, note)`` for :func:`manireg.curves.fitting.fit_exponent` from a floor choice: the
    one place a user's choice becomes fit arguments (:func:`manireg.curves.fitting.floor_model` then turns
    them into the curve model).

    Parameters
    ----------
    choice : None, "none", "fit", "estimate" or float
        See the module table.
    metric : str, default="test_mse"
        A metric against the noise-free target (``*_clean``) has floor 0: "estimate" then means no floor
        and "fit" is bounded by the data alone (the note says so).
    noise_estimate : float or NoiseEstimate, optional
        The campaign's noise-variance estimate (needed by "estimate"; its interval bounds "fit").

    Raises
    ------
    ValueError
        For an unknown choice, or "estimate" on a noisy metric without a noise estimate.
    """
    choice = parse_floor(choice)
    clean = str(metric).endswith("_clean")
    if choice == "none":
        return None, None, "no floor (plain power law)"
    if isinstance(choice, float):
        return choice, None, f"floor given: {choice:.4g}"
    usable = noise_estimate is not None and math.isfinite(float(getattr(noise_estimate, "value", noise_estimate)))
    if choice == "estimate":
        if clean:
            return None, None, f"the metric {metric!r} is measured against the noise-free target: its floor is 0"
        if not usable:
            raise ValueError("the 'estimate' floor needs the campaign's noise-variance estimate and none is recorded; "
                             "run the campaign again to record it, or choose the floor 'fit', 'none' or a value.")
        return "estimate", noise_estimate, "floor = the estimated noise variance"
    if clean:
        return "fit", None, "floor fitted (the clean metric's true floor is 0)"
    return "fit", (noise_estimate if usable else None), "floor fitted within what the noise estimate allows"


def describe_floor(choice) -> str:
    """Plain words for a floor choice (report settings, panel captions)."""
    choice = parse_floor(choice)
    if isinstance(choice, float):
        return f"given value {choice:.4g}"
    return {"none": "none", "fit": "fitted with the curve", "estimate": "noise-variance estimate"}[choice]
