"""Parameter rules written once, as data.

Every estimator and configuration in manireg declares the values each of its parameters may take in one
table, name -> :class:`Rule`, and checks them with :func:`check_params` (estimators when ``fit`` starts,
configuration dataclasses in ``__post_init__``). Messages name the parameter, its owner, what is allowed
and what was received: "the 'k_min' parameter of MLEDimension must be an int >= 3; got 1".

Rules are built with :func:`integer`, :func:`real`, :func:`choice`, :func:`boolean`, :func:`seed` and
:func:`instance`; ``none=True`` also lets ``None`` through. A bound may name a parameter checked earlier in
the same table (``integer(low="depth_min")``). Checks that involve two parameters in another way are
written in ``fit`` beside the call to :func:`check_params` and say how to fix the call.
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass

import numpy as np

from manireg._validation import check_choice, check_float, check_int

__all__ = ["Rule", "integer", "real", "choice", "boolean", "seed", "instance", "check_params", "check_attributes"]


@dataclass(frozen=True)
class Rule:
    """The values one parameter may take; build it with :func:`integer`, :func:`real`, ... ."""

    kind: str
    low: object = None
    high: object = None
    low_open: bool = False
    high_open: bool = False
    choices: tuple = ()
    none: bool = False
    finite: bool = True
    types: tuple = ()
    generator: bool = False
    note: str = ""

    def check(self, value, name: str, *, owner: str, checked: dict | None = None):
        """``value`` converted to its plain Python type (``int``, ``float``, ``bool``), or raise ``ValueError``."""
        if value is None and self.none:
            return None
        low, high = self._bound(self.low, checked), self._bound(self.high, checked)
        if self.kind == "int":
            return check_int(value, name, owner=owner, low=low, high=high)
        if self.kind == "real":
            if not self.finite and high is None and isinstance(value, numbers.Real) and not isinstance(value, bool) \
                    and value == math.inf:
                return math.inf
            try:
                return check_float(value, name, owner=owner, low=low, high=high, low_open=self.low_open,
                                   high_open=self.high_open)
            except ValueError:
                if self.finite:
                    raise
                lo = "" if low is None else f" {'>' if self.low_open else '>='} {low}"
                raise ValueError(
                    f"the '{name}' parameter of {owner} must be a real{lo} ({self.note or 'inf allowed'}); "
                    f"got {value!r}."
                ) from None
        if self.kind == "choice":
            return check_choice(value, name, owner=owner, choices=self.choices)
        if self.kind == "bool":
            if not isinstance(value, (bool, np.bool_)):
                raise ValueError(f"the '{name}' parameter of {owner} must be a bool; got {value!r}.")
            return bool(value)
        if self.kind == "seed":
            if self.generator and isinstance(value, np.random.Generator):
                return value
            if not (isinstance(value, numbers.Integral) and not isinstance(value, bool) and value >= 0):
                allowed = ["a non-negative int"] + (["None"] if self.none else []) + \
                    (["a numpy Generator"] if self.generator else [])
                text = allowed[0] if len(allowed) == 1 else ", ".join(allowed[:-1]) + " or " + allowed[-1]
                raise ValueError(f"the '{name}' parameter of {owner} must be {text}; got {value!r}.")
            return int(value)
        if self.kind == "instance":
            if not isinstance(value, self.types):
                allowed = " or ".join(t.__name__ for t in self.types) + (" or None" if self.none else "")
                raise ValueError(
                    f"the '{name}' parameter of {owner} must be a {allowed}; got {type(value).__name__}."
                    + (f" {self.note}" if self.note else "")
                )
            return value
        raise RuntimeError(f"unknown rule kind {self.kind!r} for {owner}.{name}")  # pragma: no cover - table bug

    @staticmethod
    def _bound(bound, checked):
        if isinstance(bound, str):  # the value of a parameter checked earlier in the same table
            return None if checked is None else checked.get(bound)
        return bound


def integer(low=None, high=None, *, none: bool = False) -> Rule:
    """An int (not a bool) in [low, high]; a bound may be the name of an earlier parameter."""
    return Rule("int", low=low, high=high, none=none)


def real(low=None, high=None, *, low_open: bool = False, high_open: bool = False, none: bool = False,
         finite: bool = True, note: str = "") -> Rule:
    """A real number (not a bool) in the interval; ``finite=False`` also admits +inf (``note`` says what it means)."""
    return Rule("real", low=low, high=high, low_open=low_open, high_open=high_open, none=none, finite=finite,
                note=note)


def choice(*choices) -> Rule:
    """One of ``choices``."""
    return Rule("choice", choices=tuple(choices))


def boolean() -> Rule:
    """``True`` or ``False`` (numpy bools too)."""
    return Rule("bool")


def seed(*, none: bool = False, generator: bool = False) -> Rule:
    """A non-negative int seed; ``none`` admits ``None`` (fresh entropy), ``generator`` a numpy Generator."""
    return Rule("seed", none=none, generator=generator)


def instance(*types, none: bool = False, note: str = "") -> Rule:
    """An instance of one of ``types``; ``note`` is appended to the message (how to build one)."""
    return Rule("instance", types=tuple(types), none=none, note=note)


def check_params(values, rules: dict, *, owner: str) -> dict:
    """Check ``values[name]`` against ``rules[name]`` for every rule, in table order.

    Parameters
    ----------
    values : mapping
        Parameter name -> value (every name in ``rules`` must be present).
    rules : dict
        Parameter name -> :class:`Rule`.
    owner : str
        Name of the estimator or configuration, for the messages.

    Returns
    -------
    dict
        Name -> checked value, converted to its plain Python type.
    """
    out = {}
    for name, rule in rules.items():
        out[name] = rule.check(values[name], name, owner=owner, checked=out)
    return out


def check_attributes(obj, rules: dict, *, owner: str | None = None) -> dict:
    """:func:`check_params` on the attributes of ``obj`` (an estimator's stored parameters)."""
    return check_params({name: getattr(obj, name) for name in rules}, rules,
                        owner=type(obj).__name__ if owner is None else owner)
