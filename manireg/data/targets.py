"""Regression targets of known Hölder smoothness on a manifold's parametrising coordinates.

A :class:`HolderTarget` is a function of the coordinates ``sample.coords`` of a
:class:`~manireg.data.manifolds.ManifoldSample`. Three families:

``"bumps"`` (default)
    f(z) = A sum_{j=1..J} 2^(-j s) sum_{m in Z^q} eps_{j,m} K((z - 2^(-j) (m + t_j)) / 2^(-j)): at every
    scale 2^(-j) a lattice of spacing 2^(-j) (shifted by a random t_j in [0, 1)^q) carries smooth bumps
    K(u) = exp(1 - 1/(1 - |u|^2)) (zero for |u| >= 1) of radius 2^(-j), amplitude 2^(-j s) and random
    signs eps_{j,m} = +-1. This is the construction of minimax lower bounds (Tsybakov 2009, Sec. 2.5-2.6):
    the function is rough in every direction of the coordinates at every scale from 2^(-1) down to the
    finest 2^(-J), with no low-dimensional projection structure, so no learner can reach it faster than
    the d-dimensional rate. Its order: for 0 < s < 1 and |x - y| = r in [2^(-J), 1/2] the levels j with
    2^(-j) > r contribute at most sum 2^(-j s) 2^j r ~ r^s and the finer ones at most sum 2^(-j s) ~ r^s,
    so |f(x) - f(y)| <= L r^s, and the level at 2^(-j) ~ r makes the order sharp. For non-integer s > 1
    the same sum of C-infinity bumps with scale-matched amplitudes lies in the Hölder-Zygmund class of
    order s; at integer s (s = 1) first differences carry an extra log(1/r) factor (Zygmund class). Below
    the finest scale the function is smooth; :func:`make_regression` ties J to the sample size so that
    2^(-J) is below the typical neighbour spacing n^(-1/d). The signs are a hash of (seed, j, m), so the
    function is defined everywhere without storing a lattice, and evaluating it costs O(n 2^q) per level
    (the lattice points within one spacing of z are the 2^q corners of z's cell). Coordinates of more
    than 8 columns are refused (2^q corners per point and level).
``"lacunary"``
    f(z) = A sum_{k<K} 2^(-k s) cos(2 pi 2^k <w_k, z> + phi_k), a Weierstrass-type lacunary series with
    random unit directions w_k, Hölder of order s (Zygmund, *Trigonometric Series*, Ch. II).
``"ridge_kinks"``
    f(z) = A sum_j a_j |<u_j, z> - c_j|^s, ridge functions with kinks along hyperplanes, Hölder-s for
    0 < s <= 1.

Warning: ``"lacunary"`` and ``"ridge_kinks"`` are sums of a few ridge functions, each depending on one
projection <w, z> of the coordinates. A network can learn such a sum term by term at a one-dimensional
rate, so a network's exponent on them says nothing about the d-dimensional theory (kNN, which cannot use
the ridge structure, is still a fair control). Use ``"bumps"`` to test the rate 2s/(2s+d).

``A`` scales f to unit standard deviation: in closed form for the ridge kinds (approximately), and for
``"bumps"`` exactly in expectation over the random lattice shifts and signs at every point z:
E f(z)^2 = A^2 I_q sum_j 2^(-2 j s) with I_q = int_{R^q} K(u)^2 du.

References
----------
.. [1] A. B. Tsybakov, *Introduction to Nonparametric Estimation*, Springer (2009), Sec. 2.5-2.6.
.. [2] A. Zygmund, *Trigonometric Series*, Cambridge (1959), Ch. II.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .._results import ResultMixin
from .._validation import check_choice, check_float, check_int, make_rng
from .manifolds import ManifoldSample

__all__ = ["HolderTarget", "RegressionSample", "TARGET_KINDS", "holder_target", "make_regression", "finest_level_for"]

#: Target families; the first is the default.
TARGET_KINDS = ("bumps", "lacunary", "ridge_kinks")
#: Coarsest level of the bump family (spacing 1/2).
COARSEST_LEVEL = 1
#: Finest level of the bump family when neither ``finest_level`` nor a sample size is given.
DEFAULT_FINEST_LEVEL = 8
#: Most coordinate columns the bump family evaluates (2^q lattice corners per point and level).
MAX_BUMP_COORDS = 8

_M1 = np.uint64(0xBF58476D1CE4E5B9)
_M2 = np.uint64(0x94D049BB133111EB)
_GOLDEN = np.uint64(0x9E3779B97F4A7C15)


def _mix(h: np.ndarray) -> np.ndarray:
    """splitmix64 finaliser on a uint64 array (wrapping arithmetic)."""
    h = h ^ (h >> np.uint64(30))
    h = h * _M1
    h = h ^ (h >> np.uint64(27))
    h = h * _M2
    return h ^ (h >> np.uint64(31))


def _lattice_signs(idx: np.ndarray, key: int) -> np.ndarray:
    """+-1 for each row of integer lattice indices ``idx`` (n, q), a fixed pseudo-random function of (key, idx)."""
    h = np.full(idx.shape[0], np.uint64(key), dtype=np.uint64)
    for col in range(idx.shape[1]):
        h = _mix(h + _GOLDEN + idx[:, col].astype(np.int64).view(np.uint64))
    return np.where(h >> np.uint64(63), 1.0, -1.0)


def _bump(r2: np.ndarray) -> np.ndarray:
    """K at squared radius r2: exp(1 - 1/(1 - r2)) inside the unit ball (peak 1), 0 outside; C-infinity."""
    out = np.zeros_like(r2)
    inside = r2 < 1.0
    out[inside] = np.exp(1.0 - 1.0 / (1.0 - r2[inside]))
    return out


def bump_energy(q: int) -> float:
    """I_q = int_{R^q} K(u)^2 du for the bump K of :func:`_bump` (radial quadrature)."""
    r = np.linspace(0.0, 1.0, 20001)[1:-1]
    k2 = np.exp(2.0 - 2.0 / (1.0 - r * r))
    sphere_area = 2.0 * math.pi ** (q / 2) / math.gamma(q / 2)
    integrand = k2 * r ** (q - 1)
    return float(sphere_area * np.sum((integrand[1:] + integrand[:-1]) / 2) * (r[1] - r[0]))


def finest_level_for(n: int, d: int) -> int:
    """Finest bump level for a sample of ``n`` points of intrinsic dimension ``d``: the smallest J with
    2^(-J) <= n^(-1/d) / 2 (half the typical neighbour spacing on a unit-size domain), clipped to [3, 16]."""
    n = max(int(n), 2)
    d = max(int(d), 1)
    return int(min(max(math.ceil(math.log2(n) / d) + 1, 3), 16))


@dataclass
class HolderTarget(ResultMixin):
    """A target function with stated Hölder smoothness ``smoothness`` on ``n_coords`` coordinates.

    Ridge kinds keep one row of ``directions``, ``offsets``, ``weights``, ``frequencies`` per term; the bump
    kind keeps one entry of ``weights`` (2^(-j s)) and ``frequencies`` (2^j) and one row of ``offsets``
    (the lattice shift t_j) per level j = 1..``finest_level``, and ``sign_key`` seeds the sign hash.
    """

    smoothness: float
    kind: str
    n_coords: int
    directions: np.ndarray = field(repr=False)
    offsets: np.ndarray = field(repr=False)
    weights: np.ndarray = field(repr=False)
    frequencies: np.ndarray = field(repr=False)
    scale: float = 1.0
    finest_level: int | None = None
    sign_key: int = 0
    _skip_in_dict = ("directions", "offsets", "weights", "frequencies")

    def __call__(self, z) -> np.ndarray:
        z = np.asarray(z, dtype=np.float64)
        if z.ndim != 2 or z.shape[1] != self.n_coords:
            raise ValueError(f"HolderTarget expects coordinates of shape (n, {self.n_coords}); got {z.shape}.")
        if self.kind == "bumps":
            return self.scale * self._bumps(z)
        proj = z @ self.directions.T  # (n, K)
        if self.kind == "lacunary":
            terms = self.weights * np.cos(2 * np.pi * self.frequencies * proj + self.offsets)
        elif self.kind == "ridge_kinks":
            terms = self.weights * np.abs(proj - self.offsets) ** self.smoothness
        else:
            raise ValueError(f"HolderTarget: unknown kind {self.kind!r}; known: {TARGET_KINDS}.")
        return self.scale * terms.sum(axis=1)

    def _bumps(self, z: np.ndarray) -> np.ndarray:
        q = self.n_coords
        corners = ((np.arange(2**q)[:, None] >> np.arange(q)) & 1).astype(np.int64)  # (2^q, q)
        out = np.zeros(z.shape[0])
        for level, (amp, freq, shift) in enumerate(zip(self.weights, self.frequencies, self.offsets)):
            u = z * freq - shift  # coordinates in units of the level's spacing
            base = np.floor(u).astype(np.int64)
            frac = u - base
            key = _mix(np.array([self.sign_key + level + 1], dtype=np.uint64))[0]
            acc = np.zeros(z.shape[0])
            for c in corners:
                r2 = np.sum((frac - c) ** 2, axis=1)
                near = r2 < 1.0
                if near.any():
                    acc[near] += _bump(r2[near]) * _lattice_signs(base[near] + c, int(key))
            out += amp * acc
        return out


def holder_target(n_coords: int, smoothness: float = 1.0, *, kind: str = "bumps", n_terms: int = 12,
                  finest_level: int | None = None, seed=None) -> HolderTarget:
    """Draw a target of Hölder order ``smoothness`` on ``n_coords`` coordinates (see the module docstring).

    Parameters
    ----------
    n_coords : int
        Number of coordinate columns q (``sample.coords.shape[1]``).
    smoothness : float, default=1.0
        Hölder order s > 0 (``"ridge_kinks"``: 0 < s <= 1).
    kind : {"bumps", "lacunary", "ridge_kinks"}, default="bumps"
        Target family. The ridge kinds can be learned by a network at a one-dimensional rate: use them only
        as named alternatives, not to test the rate 2s/(2s+d).
    n_terms : int, default=12
        Ridge terms (ridge kinds only).
    finest_level : int, optional
        Finest bump level J (spacing 2^(-J)); default 8. :func:`make_regression` ties it to the sample
        size (:func:`finest_level_for`).
    seed : int, Generator or None

    Returns
    -------
    HolderTarget

    References
    ----------
    .. [1] A. B. Tsybakov, *Introduction to Nonparametric Estimation*, Springer (2009), Sec. 2.5-2.6.
    """
    owner = "holder_target"
    n_coords = check_int(n_coords, "n_coords", owner=owner, low=1)
    s = check_float(smoothness, "smoothness", owner=owner, low=0.0, low_open=True)
    check_choice(kind, "kind", owner=owner, choices=TARGET_KINDS)
    n_terms = check_int(n_terms, "n_terms", owner=owner, low=1, high=30)
    rng = make_rng(seed)
    if kind == "bumps":
        if n_coords > MAX_BUMP_COORDS:
            raise ValueError(
                f"the 'bumps' target family evaluates 2^q lattice corners per point, so it takes at most "
                f"{MAX_BUMP_COORDS} coordinate columns; got n_coords={n_coords}. Use kind='lacunary' for "
                "higher-dimensional coordinates (a ridge family: see the warning in manireg.data.targets)."
            )
        J = DEFAULT_FINEST_LEVEL if finest_level is None else check_int(
            finest_level, "finest_level", owner=owner, low=COARSEST_LEVEL, high=24)
        j = np.arange(COARSEST_LEVEL, J + 1, dtype=float)
        weights = 2.0 ** (-j * s)
        freqs = 2.0**j
        shifts = rng.uniform(0.0, 1.0, (j.size, n_coords))
        key = int(rng.integers(0, 2**62))
        scale = 1.0 / math.sqrt(bump_energy(n_coords) * float(np.sum(weights**2)))
        return HolderTarget(s, kind, n_coords, np.zeros((0, n_coords)), shifts, weights, freqs, scale, J, key)
    if kind == "ridge_kinks" and s > 1:
        raise ValueError(
            f"the 'ridge_kinks' target family is Hölder-s only for 0 < s <= 1; got smoothness={s}. "
            "Use kind='bumps'."
        )
    dirs = rng.standard_normal((n_terms, n_coords))
    dirs /= np.linalg.norm(dirs, axis=1, keepdims=True)
    if kind == "lacunary":
        k = np.arange(n_terms)
        freqs = 2.0**k
        weights = 2.0 ** (-k * s)
        offsets = rng.uniform(0, 2 * np.pi, n_terms)
        scale = 1.0 / np.sqrt(0.5 * np.sum(weights**2))
    elif kind == "ridge_kinks":
        freqs = np.ones(n_terms)
        weights = rng.choice([-1.0, 1.0], n_terms) * rng.uniform(0.5, 1.0, n_terms)
        offsets = rng.uniform(-0.5, 0.5, n_terms)
        scale = 1.0 / np.sqrt(np.sum(weights**2) * 0.1)
    else:  # pragma: no cover - check_choice already refused
        raise ValueError(f"the 'kind' parameter of {owner} must be one of {TARGET_KINDS}; got {kind!r}.")
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


def make_regression(sample: ManifoldSample, smoothness: float = 1.0, *, noise_std: float = 0.1, kind: str = "bumps",
                    n_terms: int = 12, finest_level: int | None = None, seed=None) -> RegressionSample:
    """Attach a Hölder target plus Gaussian label noise of standard deviation ``noise_std`` to a sample.

    The default target family is ``"bumps"``, rough at every scale in every intrinsic direction; its finest
    level defaults to :func:`finest_level_for` ``(n, d)`` of the sample. ``"lacunary"`` and
    ``"ridge_kinks"`` are sums of ridge functions, which a network can learn at a one-dimensional rate (see
    :mod:`manireg.data.targets`).
    """
    noise_std = check_float(noise_std, "noise_std", owner="make_regression", low=0.0)
    rng = make_rng(seed)
    if kind == "bumps" and finest_level is None:
        finest_level = finest_level_for(sample.n_samples, sample.dimension)
    target = holder_target(sample.coords.shape[1], smoothness, kind=kind, n_terms=n_terms,
                           finest_level=finest_level, seed=rng)
    f = target(sample.coords)
    y = f + noise_std * rng.standard_normal(f.shape) if noise_std > 0 else f.copy()
    return RegressionSample(sample.points, y, f, float(smoothness), noise_std**2, sample, target)
