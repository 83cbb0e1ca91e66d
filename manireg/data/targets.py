"""Regression targets of known Hölder smoothness on a manifold's parametrising coordinates.

A :class:`HolderTarget` is a function of the coordinates ``sample.coords`` of a
:class:`~manireg.data.manifolds.ManifoldSample`. Two families:

``"lacunary"`` (default)
    f(z) = A sum_{k<K} 2^(-k s) cos(2 pi 2^k <w_k, z> + phi_k), a Weierstrass-type lacunary series with
    random unit directions w_k. Its Hölder order is exactly s (for non-integer s): the coefficient decay
    2^(-ks) against the frequency growth 2^k sets it (Zygmund, *Trigonometric Series*, Ch. II, on
    lacunary series; the classical Weierstrass function is the case w fixed). It is rough at every scale
    down to 2^(-K), which is what makes the learning-curve exponent depend on s; a function rough only at
    a few points would not.
``"bumps"``
    f(z) = A sum_j a_j |<u_j, z> - c_j|^s, ridge functions with kinks along hyperplanes; for 0 < s <= 1
    each term is Hölder-s since | |x|^s - |y|^s | <= |x - y|^s.

``A`` scales f to unit standard deviation over its domain (approximately), so noise levels are comparable.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .._results import ResultMixin
from .._validation import check_choice, check_float, check_int, make_rng
from .manifolds import ManifoldSample

__all__ = ["HolderTarget", "RegressionSample", "holder_target", "make_regression"]


@dataclass
class HolderTarget(ResultMixin):
    """A target function with stated Hölder smoothness ``smoothness`` on ``n_coords`` coordinates."""

    smoothness: float
    kind: str
    n_coords: int
    directions: np.ndarray = field(repr=False)
    offsets: np.ndarray = field(repr=False)
    weights: np.ndarray = field(repr=False)
    frequencies: np.ndarray = field(repr=False)
    scale: float = 1.0
    _skip_in_dict = ("directions", "offsets", "weights", "frequencies")

    def __call__(self, z) -> np.ndarray:
        z = np.asarray(z, dtype=np.float64)
        if z.ndim != 2 or z.shape[1] != self.n_coords:
            raise ValueError(f"HolderTarget expects coordinates of shape (n, {self.n_coords}); got {z.shape}.")
        proj = z @ self.directions.T  # (n, K)
        if self.kind == "lacunary":
            terms = self.weights * np.cos(2 * np.pi * self.frequencies * proj + self.offsets)
        else:
            terms = self.weights * np.abs(proj - self.offsets) ** self.smoothness
        return self.scale * terms.sum(axis=1)


def holder_target(n_coords: int, smoothness: float = 1.0, *, kind: str = "lacunary", n_terms: int = 12, seed=None) -> HolderTarget:
    """Draw a target of Hölder order ``smoothness`` on ``n_coords`` coordinates (see module docstring)."""
    owner = "holder_target"
    n_coords = check_int(n_coords, "n_coords", owner=owner, low=1)
    s = check_float(smoothness, "smoothness", owner=owner, low=0.0, low_open=True)
    check_choice(kind, "kind", owner=owner, choices=("lacunary", "bumps"))
    n_terms = check_int(n_terms, "n_terms", owner=owner, low=1, high=30)
    if kind == "bumps" and s > 1:
        raise ValueError(f"the 'bumps' target family is Hölder-s only for 0 < s <= 1; got smoothness={s}. Use kind='lacunary'.")
    rng = make_rng(seed)
    dirs = rng.standard_normal((n_terms, n_coords))
    dirs /= np.linalg.norm(dirs, axis=1, keepdims=True)
    if kind == "lacunary":
        k = np.arange(n_terms)
        freqs = 2.0**k
        weights = 2.0 ** (-k * s)
        offsets = rng.uniform(0, 2 * np.pi, n_terms)
        scale = 1.0 / np.sqrt(0.5 * np.sum(weights**2))
    else:
        freqs = np.ones(n_terms)
        weights = rng.choice([-1.0, 1.0], n_terms) * rng.uniform(0.5, 1.0, n_terms)
        offsets = rng.uniform(-0.5, 0.5, n_terms)
        scale = 1.0 / np.sqrt(np.sum(weights**2) * 0.1)
    return HolderTarget(s, kind, n_coords, dirs, offsets, weights, freqs, float(scale))


@dataclass
class RegressionSample(ResultMixin):
    """Inputs, noisy targets and the noise-free target values, with the known s and noise variance."""

    X: np.ndarray = field(repr=False)
    y: np.ndarray = field(repr=False)
    f_clean: np.ndarray = field(repr=False)
    smoothness: float
    noise_variance: float
    manifold: ManifoldSample = field(repr=False)
    target: HolderTarget = field(repr=False)
    _skip_in_dict = ("X", "y", "f_clean", "target")

    @property
    def dimension(self) -> int:
        return self.manifold.dimension

    @property
    def ambient_dim(self) -> int:
        return self.manifold.ambient_dim


def make_regression(sample: ManifoldSample, smoothness: float = 1.0, *, noise_std: float = 0.1, kind: str = "lacunary", n_terms: int = 12, seed=None) -> RegressionSample:
    """Attach a Hölder target plus Gaussian label noise of standard deviation ``noise_std`` to a sample."""
    noise_std = check_float(noise_std, "noise_std", owner="make_regression", low=0.0)
    rng = make_rng(seed)
    target = holder_target(sample.coords.shape[1], smoothness, kind=kind, n_terms=n_terms, seed=rng)
    f = target(sample.coords)
    y = f + noise_std * rng.standard_normal(f.shape) if noise_std > 0 else f.copy()
    return RegressionSample(sample.points, y, f, float(smoothness), noise_std**2, sample, target)
