"""Simulated learning curves with the correlation structure of a real campaign, for calibrating fits.

A campaign measures the test error of a learner at sizes ``n_1 < ... < n_k`` in ``R`` repeats. Its errors are
not independent draws per cell:

* **per-repeat random effect**: a repeat's data draw and seed make all of its cells a little better or worse;
* **nested training sets**: within a repeat the training set at ``n_{i+1}`` contains the one at ``n_i``, so a
  repeat's errors are positively correlated across successive sizes (an AR(1) process over the sizes);
* **one shared test set**: every cell is scored on the same test set, so all cells share a common random
  offset (a factor on the excess error, and an additive offset on the floor, the test set's own noise mean);
* an independent part per cell.

:func:`simulate_errors` draws error matrices with this structure, vectorised over many simulated campaigns;
:func:`errors_to_rows` turns one of them into campaign rows. The structure is what the interval and the
verdict of :mod:`manireg.curves.fitting` are calibrated against (``tests/benchmarks/bench_fitting.py``).
"""

from __future__ import annotations

import numpy as np

from manireg._validation import check_float, check_int, make_rng

__all__ = ["simulate_errors", "errors_to_rows", "true_local_exponent", "simulated_estimate", "fit_settings", "run_fits",
           "coverage", "measured_rate"]


def _log_excess(sizes, exponent, prefactor, bend):
    """log of the noise-free excess error at ``sizes``; ``bend`` = None, ("kink", n_break, b_high) or
    ("smooth", b_high) (local exponent moving linearly in log n from ``exponent`` to ``b_high``)."""
    x = np.log(np.asarray(sizes, dtype=float))
    if bend is None:
        return np.log(prefactor) - exponent * x
    kind = bend[0]
    if kind == "kink":
        _, n_break, b_high = bend
        xb = np.log(n_break)
        return np.log(prefactor) - exponent * x - (b_high - exponent) * np.maximum(x - xb, 0.0)
    if kind == "smooth":
        _, b_high = bend
        x0, x1 = x[0], x[-1]
        t = (x - x0) / (x1 - x0)
        # integral of b(x) = exponent + (b_high - exponent) t over x
        return np.log(prefactor) - exponent * (x - x0) - 0.5 * (b_high - exponent) * t**2 * (x1 - x0) - exponent * x0
    raise ValueError(f"simulate_errors: bend must be None, ('kink', n_break, b_high) or ('smooth', b_high); got {bend!r}.")


def true_local_exponent(sizes, exponent=0.5, bend=None):
    """Exponent of the noise-free excess error between successive sizes (for checking the scan)."""
    sizes = np.asarray(sizes, dtype=float)
    le = _log_excess(sizes, exponent, 1.0, bend)
    return -np.diff(le) / np.diff(np.log(sizes))


def simulate_errors(
    *,
    runs,
    repeats,
    sizes,
    exponent=0.5,
    prefactor=1.0,
    floor=0.0,
    bend=None,
    scatter=0.1,
    repeat_share=0.3,
    nested_share=0.4,
    nested_corr=0.7,
    test_scatter=0.04,
    test_size_scatter=0.01,
    n_test=2000,
    seed=0,
):
    """Error matrices of simulated campaigns: shape ``(runs, repeats, len(sizes))``.

    ``err[r, i] = excess(n_i) * exp(e_ri + t + t_i) + floor * (1 + sqrt(2 / n_test) z)`` where the log
    scatter ``e_ri`` (standard deviation ``scatter``) is split into a per-repeat effect (variance share
    ``repeat_share``), an AR(1) process over the sizes within a repeat (share ``nested_share``, correlation
    ``nested_corr`` between successive sizes: nested training sets) and an independent remainder; ``t`` is the
    shared test set's common factor (sd ``test_scatter``), ``t_i`` a smaller test-set part that differs by size
    but is shared by every repeat (sd ``test_size_scatter``), and ``z`` the test set's noise mean (one per run).

    Parameters
    ----------
    runs, repeats : int
        Simulated campaigns and repeats per campaign.
    sizes : array-like
        Sample sizes.
    exponent, prefactor, floor : float
        True curve ``prefactor n^-exponent + floor`` (before a bend).
    bend : None or tuple
        ``("kink", n_break, b_high)``: exponent ``b_high`` above ``n_break``; ``("smooth", b_high)``: the local
        exponent moves linearly in ``log n`` from ``exponent`` to ``b_high`` over the sizes.
    seed : int or Generator

    Returns
    -------
    ndarray of shape (runs, repeats, k)
    """
    owner = "simulate_errors"
    runs = check_int(runs, "runs", owner=owner, low=1)
    repeats = check_int(repeats, "repeats", owner=owner, low=1)
    scatter = check_float(scatter, "scatter", owner=owner, low=0.0)
    sizes = np.asarray(sizes, dtype=float)
    k = sizes.size
    rng = make_rng(seed)
    le = _log_excess(sizes, exponent, prefactor, bend)
    sd_rep = scatter * np.sqrt(repeat_share)
    sd_ar = scatter * np.sqrt(nested_share)
    sd_ind = scatter * np.sqrt(max(0.0, 1.0 - repeat_share - nested_share))
    u = rng.standard_normal((runs, repeats, 1)) * sd_rep
    z = rng.standard_normal((runs, repeats, k))
    ar = np.empty((runs, repeats, k))
    ar[..., 0] = z[..., 0]
    innov = np.sqrt(1.0 - nested_corr**2)
    for i in range(1, k):
        ar[..., i] = nested_corr * ar[..., i - 1] + innov * z[..., i]
    ind = rng.standard_normal((runs, repeats, k)) * sd_ind
    t = rng.standard_normal((runs, 1, 1)) * test_scatter
    ti = rng.standard_normal((runs, 1, k)) * test_size_scatter
    zf = rng.standard_normal((runs, 1, 1))
    logs = le[None, None, :] + u + sd_ar * ar + ind + t + ti
    return np.exp(logs) + floor * (1.0 + np.sqrt(2.0 / n_test) * zf)


def errors_to_rows(E, sizes, *, learner="net", metric="test_mse"):
    """Campaign rows (pandas DataFrame) from one ``(repeats, k)`` error matrix."""
    import pandas as pd

    E = np.asarray(E, dtype=float)
    R, k = E.shape
    sizes = np.asarray(sizes)
    return pd.DataFrame(
        {
            "learner": learner,
            "n": np.tile(sizes.astype(int), R),
            "repeat": np.repeat(np.arange(R), k),
            metric: E.ravel(),
            "status": "ok",
        }
    )


class _Estimate:
    """A stand-in for a noise estimate with an interval (value, interval)."""

    def __init__(self, value, interval):
        self.value = value
        self.interval = interval


def simulated_estimate(true_floor, rel_se=0.1, rel_halfwidth=0.2, rng=None):
    """A noise estimate of ``true_floor`` with relative error ``rel_se`` and an interval of relative
    half-width ``rel_halfwidth`` around it (as a noise estimator with an interval would give)."""
    rng = make_rng(rng)
    v = true_floor * (1.0 + rel_se * rng.standard_normal())
    return _Estimate(v, (v * (1 - rel_halfwidth), v * (1 + rel_halfwidth)))


def fit_settings(choice, true_floor, rng):
    """Keyword arguments of :func:`manireg.curves.fitting.fit_exponent` for a floor choice in a simulation:
    ``"none"``, ``"fit"`` (bounded by a simulated noise estimate), ``"fit-unbounded"``, ``"estimate"``,
    ``"value"`` (the true floor)."""
    if choice == "none":
        return {"floor": None}
    if choice == "fit":
        return {"floor": "fit", "noise_variance": simulated_estimate(true_floor, rng=rng)}
    if choice == "fit-unbounded":
        return {"floor": "fit"}
    if choice == "estimate":
        return {"floor": "estimate", "noise_variance": simulated_estimate(true_floor, rng=rng)}
    if choice == "value":
        return {"floor": float(true_floor)}
    raise ValueError(f"fit_settings: unknown floor choice {choice!r}; use none, fit, fit-unbounded, estimate or value.")


def run_fits(*, runs, repeats, sizes, choice="none", seed=0, fit_kwargs=None, **sim):
    """Fit ``runs`` simulated campaigns; returns a list of ExponentFit (warnings silenced)."""
    import warnings

    from manireg.curves.fitting import fit_exponent

    rng = make_rng(seed)
    E = simulate_errors(runs=runs, repeats=repeats, sizes=sizes, seed=rng, **sim)
    out = []
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for e in E:
            kw = fit_settings(choice, sim.get("floor", 0.0), rng)
            out.append(fit_exponent(errors_to_rows(e, sizes), **kw, **(fit_kwargs or {})))
    return out


def coverage(fits, true_exponent):
    """Fraction of fits whose interval contains ``true_exponent``."""
    return float(np.mean([f.interval[0] <= true_exponent <= f.interval[1] for f in fits]))


def measured_rate(fits):
    """Fraction of fits whose verdict is "measured"."""
    return float(np.mean([f.verdict == "measured" for f in fits]))
