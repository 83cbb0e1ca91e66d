"""Calibration of neighbour-based dimension estimates against samples of known dimension.

Neighbour-based estimates fall below the true d as d grows at a fixed number of points (the k-th neighbour
is no longer in a locally uniform neighbourhood, and a larger share of points sits near an edge). The
calibration table holds, for a grid of dimensions d, the estimate each estimator gives at every profile
scale on a uniform sample of the d-ball drawn with the same number of points; an estimate on data is then
mapped back to the d whose reference gives the same raw value (linear interpolation in the table).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from ..._results import ResultMixin

__all__ = ["CalibrationTable", "calibration_table", "DEFAULT_CALIBRATION_GRID", "MAX_CALIBRATION_POINTS",
           "CALIBRATED_ESTIMATORS"]

#: Dimensions of the reference samples (the grid is cut at the ambient dimension D).
DEFAULT_CALIBRATION_GRID = (1, 2, 3, 4, 5, 6, 8, 10, 12, 15, 20, 25, 30, 40, 50)
#: References are drawn with min(n, this) points (their cost grows with n; noted in the table).
MAX_CALIBRATION_POINTS = 3000
#: Estimators whose profile values are calibrated (local PCA counts are not: a variance threshold is no
#: smooth function of d, and it saturates at the neighbourhood size).
CALIBRATED_ESTIMATORS = ("mle", "twonn")


@dataclass
class CalibrationTable(ResultMixin):
    """Raw estimates on uniform d-ball samples: ``values[estimator][i][j]`` at ``d_grid[i]`` and ``scales[j]``.

    ``n_reference`` points per reference (the data's distinct points, at most
    :data:`MAX_CALIBRATION_POINTS`), seed ``seed``. ``reference`` names the reference samples.
    """

    n_reference: int
    scales: tuple
    d_grid: tuple
    seed: int
    reference: str
    values: dict

    def curve(self, estimator: str, scale: int):
        """(raw values, d grid) of one estimator at one scale, raw values made non-decreasing in d."""
        j = list(self.scales).index(int(scale))
        raw = np.maximum.accumulate(np.asarray(self.values[estimator], dtype=float)[:, j])
        return raw, np.asarray(self.d_grid, dtype=float)

    def has(self, estimator: str, scale) -> bool:
        return estimator in self.values and int(scale) in self.scales

    def calibrate(self, estimator: str, scale: int, raw):
        """Calibrated d for raw estimate(s) at one scale.

        Linear interpolation of d against the reference's raw value; below the smallest reference value the
        map is d_grid[0] * raw / raw_0, above the largest d_grid[-1] * raw / raw_top (proportional
        extrapolation, flagged by :meth:`beyond`).
        """
        ref, grid = self.curve(estimator, scale)
        x = np.asarray(raw, dtype=float)
        # strictly increasing abscissae for np.interp (ties from saturation get a tiny slope)
        ref = ref + np.arange(ref.size) * 1e-9
        out = np.interp(x, ref, grid)
        out = np.where(x < ref[0], grid[0] * x / ref[0], out)
        out = np.where(x > ref[-1], grid[-1] * x / ref[-1], out)
        return float(out) if out.ndim == 0 else out

    def beyond(self, estimator: str, scale: int, raw) -> bool:
        """True when ``raw`` is above the largest reference value (the map extrapolates)."""
        ref, _ = self.curve(estimator, scale)
        return bool(raw > ref[-1])


def _ball(n: int, d: int, rng) -> np.ndarray:
    g = rng.standard_normal((n, d))
    g /= np.linalg.norm(g, axis=1, keepdims=True)
    return g * rng.uniform(size=(n, 1)) ** (1.0 / d)


def _sphere(n: int, d: int, rng) -> np.ndarray:
    g = rng.standard_normal((n, d + 1))
    return g / np.linalg.norm(g, axis=1, keepdims=True)


def _gaussian(n: int, d: int, rng) -> np.ndarray:
    return rng.standard_normal((n, d))


#: Reference samples: name -> (sampler, description).
REFERENCES = {
    "ball": (_ball, "uniform sample of the unit d-ball"),
    "sphere": (_sphere, "uniform sample of the unit d-sphere"),
    "gaussian": (_gaussian, "standard Gaussian sample of R^d"),
}
DEFAULT_REFERENCE = "ball"


def _sorted_neighbour_distances(P: np.ndarray, k: int, chunk: int = 1000) -> np.ndarray:
    """Distances to the k nearest other points, sorted (exact, from BLAS pair distances in row chunks)."""
    sq = np.einsum("ij,ij->i", P, P)
    out = np.empty((P.shape[0], k))
    for s in range(0, P.shape[0], chunk):
        e = min(s + chunk, P.shape[0])
        d2 = sq[s:e, None] + sq[None, :] - 2.0 * P[s:e] @ P.T
        d2[np.arange(e - s), np.arange(s, e)] = np.inf  # self
        part = np.partition(d2, k - 1, axis=1)[:, :k]
        out[s:e] = np.sqrt(np.maximum(np.sort(part, axis=1), 0.0))
    return np.maximum(out, np.finfo(float).tiny)


@lru_cache(maxsize=16)
def _table(n: int, scales: tuple, d_grid: tuple, seed: int, estimators: tuple, reference: str) -> CalibrationTable:
    from .profile import _value
    from .gride import gride_log_ratios
    from .mle import _log_sums

    rng = np.random.default_rng(seed)
    kmax = max(scales)
    values = {e: [] for e in estimators}
    for d in d_grid:
        P = REFERENCES[reference][0](n, d, rng)
        dist = _sorted_neighbour_distances(P, kmax)
        if "mle" in estimators:
            sums = _log_sums(dist, np.asarray(scales))
            values["mle"].append([_value("mle", k, sums[:, c]) for c, k in enumerate(scales)])
        if "twonn" in estimators:
            values["twonn"].append([_value("twonn", k, gride_log_ratios(dist, k)) for k in scales])
    return CalibrationTable(n, scales, d_grid, seed, REFERENCES[reference][1], values)


def calibration_table(n: int, scales, *, d_grid=None, ambient_dim: int | None = None, seed: int = 0,
                      estimators=CALIBRATED_ESTIMATORS, reference: str | None = None) -> CalibrationTable:
    """The calibration table for ``n`` points and neighbour counts ``scales`` (cached in memory).

    For every d of the grid (default ``DEFAULT_CALIBRATION_GRID``; ``ambient_dim`` is accepted for callers but
    does not cut the grid, so one table serves every data set of the same size), ``min(n, MAX_CALIBRATION_POINTS)`` seeded uniform points of the unit d-ball are drawn; the
    MLE (k - 1) / mean S_k and the generalised ratio estimate at every scale are recorded. Tables are kept
    in an ``lru_cache`` keyed by (n, scales, d grid, seed), so a second call with the same settings is free.
    """
    n_ref = int(min(n, MAX_CALIBRATION_POINTS))
    scales = tuple(sorted({2, *(int(k) for k in scales)}))
    if max(scales) >= n_ref:
        raise ValueError(f"calibration_table: the largest scale k={max(scales)} needs more than {max(scales)} "
                         f"reference points; got n={n_ref}. Lower the scales.")
    if d_grid is None:
        d_grid = DEFAULT_CALIBRATION_GRID
    d_grid = tuple(sorted({int(d) for d in d_grid}))
    if len(d_grid) < 2:
        d_grid = (1, 2)
    reference = reference or DEFAULT_REFERENCE
    if reference not in REFERENCES:
        raise ValueError(f"calibration_table: reference must be one of {tuple(REFERENCES)}; got {reference!r}.")
    return _table(n_ref, scales, d_grid, int(seed), tuple(estimators), reference)
