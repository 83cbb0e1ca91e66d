"""Logged contextual-bandit data: covariates on a manifold, K actions, rewards and the logging propensities.

A logged data set holds, for each row i, covariates ``x_i``, the action ``a_i`` a logging policy took with
probability ``e(a_i | x_i)`` (the propensity), and the observed reward ``r_i``. Off-policy learning fits a
new policy from these rows (:mod:`manireg.curves.policy`).

:func:`make_logged_bandit` attaches a synthetic problem with known truth to a
:class:`~manireg.data.manifolds.ManifoldSample`:

* rewards ``r = mu_a(x) + noise``, where each ``mu_a`` is a Hölder target of order ``smoothness`` on the
  manifold's d-dimensional parametrising coordinates (:func:`manireg.data.targets.holder_target`);
* a logging policy ``e(a | x) = m + (1 - K m) softmax_a(beta * g_a(x))`` with smooth scores ``g_a`` (linear in
  the coordinates), so every propensity is at least ``m = min_propensity`` (the overlap) and ``m = 1/K`` is
  uniform logging;
* the optimal policy ``argmax_a mu_a(x)`` and its value on the rows are known exactly.

:func:`load_logged` reads logged data from a table (:func:`manireg.data.load_table`) and
:func:`check_logged` validates arrays given in Python.

References
----------
.. [1] M. Dudík, J. Langford, L. Li, "Doubly robust policy evaluation and learning", ICML 2011.
.. [2] S. Athey, S. Wager, "Policy learning with observational data", Econometrica 89 (2021).
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field

import numpy as np

from .._results import ResultMixin
from .._validation import DataValidationError, check_float, check_int, make_rng
from .manifolds import ManifoldSample

__all__ = ["LoggedBandit", "make_logged_bandit", "logged_bandit", "load_logged", "check_logged", "softmax",
           "PROPENSITY_SUM_TOL"]

#: Propensities of all actions given per row must sum to one within this tolerance.
PROPENSITY_SUM_TOL = 1e-4


def softmax(z, axis=-1):
    """Row-wise softmax, computed stably (max subtracted)."""
    z = np.asarray(z, dtype=np.float64)
    z = z - z.max(axis=axis, keepdims=True)
    ez = np.exp(z)
    return ez / ez.sum(axis=axis, keepdims=True)


@dataclass
class LoggedBandit(ResultMixin):
    """Logged bandit data, with the truth when it is synthetic.

    Attributes
    ----------
    X : (N, D) array of covariates.
    action : (N,) int array in ``[0, n_actions)``.
    reward : (N,) float array.
    propensity : (N,) array or None
        Logged probability of the action taken, ``e(a_i | x_i)``; None when the table gives none.
    n_actions : int
        K.
    action_names : list of str
        Label of each action code (a table's original values).
    mu : (N, K) array or None
        True mean reward of every action at every row (synthetic data only).
    e : (N, K) array or None
        True logging probabilities of every action (synthetic data only).
    dimension, smoothness : float or None
        Known intrinsic dimension and Hölder order of the reward functions (synthetic data).
    noise_std : float or None
        Reward-noise standard deviation (synthetic data).
    min_propensity : float or None
        The overlap bound m of the logging policy (synthetic data); every propensity is >= m.
    source : str
        Where the data came from.
    """

    X: np.ndarray = field(repr=False)
    action: np.ndarray = field(repr=False)
    reward: np.ndarray = field(repr=False)
    propensity: np.ndarray | None = field(repr=False)
    n_actions: int
    action_names: list
    mu: np.ndarray | None = field(default=None, repr=False)
    e: np.ndarray | None = field(default=None, repr=False)
    dimension: float | None = None
    smoothness: float | None = None
    noise_std: float | None = None
    min_propensity: float | None = None
    source: str = "arrays"
    coords: np.ndarray | None = field(default=None, repr=False)
    _skip_in_dict = ("X", "action", "reward", "propensity", "mu", "e", "coords")

    @property
    def n_samples(self) -> int:
        return int(self.X.shape[0])

    @property
    def ambient_dim(self) -> int:
        return int(self.X.shape[1])

    @property
    def optimal_action(self):
        """``argmax_a mu_a(x_i)`` per row (synthetic data), else None."""
        return None if self.mu is None else np.argmax(self.mu, axis=1)

    @property
    def optimal_value(self):
        """Mean of ``max_a mu_a(x_i)`` over the rows (synthetic data), else None."""
        return None if self.mu is None else float(np.mean(self.mu.max(axis=1)))


def _logging_scores(coords, n_actions, rng):
    """Scores g_a(x) = <w_a, z> on standardised coordinates z (one random unit direction per action)."""
    z = np.asarray(coords, float)
    z = (z - z.mean(axis=0)) / np.maximum(z.std(axis=0), 1e-12)
    W = rng.standard_normal((z.shape[1], n_actions))
    W /= np.linalg.norm(W, axis=0, keepdims=True)
    return z @ W


def make_logged_bandit(sample: ManifoldSample, *, n_actions: int = 3, smoothness: float = 1.0,
                       noise_std: float = 1.0, min_propensity: float = 0.1, logging_strength: float = 2.0,
                       reward_kind: str = "lacunary", seed=None) -> LoggedBandit:
    """Logged bandit data on the points of ``sample`` with known reward functions and propensities.

    Parameters
    ----------
    sample : ManifoldSample
        Covariates (``sample.points``) and the coordinates the reward functions are defined on.
    n_actions : int, default=3
        K >= 2.
    smoothness : float, default=1.0
        Hölder order s of every reward function ``mu_a`` (d-dimensional lacunary family by default).
    noise_std : float, default=1.0
        Standard deviation of the Gaussian reward noise (the ``mu_a`` have unit spread).
    min_propensity : float, default=0.1
        Overlap m in ``(0, 1/K]``: ``e(a | x) = m + (1 - K m) softmax_a(logging_strength * g_a(x))`` >= m.
        ``1/K`` gives uniform logging; small m gives poor overlap.
    logging_strength : float, default=2.0
        How strongly the logging policy depends on x (0: uniform whatever m).
    reward_kind : {"lacunary", "bumps"}
        Family of :func:`manireg.data.targets.holder_target`.
    seed : int, Generator or None
        Seed of the reward functions, the logging scores, the actions and the noise.

    Returns
    -------
    LoggedBandit
        With ``mu`` and ``e`` (the truth) filled in.

    References
    ----------
    .. [1] M. Dudík, J. Langford, L. Li, ICML 2011.
    """
    from .targets import holder_target

    owner = "make_logged_bandit"
    if not isinstance(sample, ManifoldSample):
        raise ValueError(f"the 'sample' parameter of {owner} must be a ManifoldSample (e.g. manireg.data.sphere(...)); "
                         f"got {type(sample).__name__}.")
    K = check_int(n_actions, "n_actions", owner=owner, low=2, high=50)
    s = check_float(smoothness, "smoothness", owner=owner, low=0.0, low_open=True)
    noise_std = check_float(noise_std, "noise_std", owner=owner, low=0.0)
    m = check_float(min_propensity, "min_propensity", owner=owner, low=0.0, high=1.0 / K, low_open=True)
    beta = check_float(logging_strength, "logging_strength", owner=owner, low=0.0)
    rng = make_rng(seed)
    coords = sample.coords
    mu = np.column_stack([holder_target(coords.shape[1], s, kind=reward_kind, seed=rng)(coords) for _ in range(K)])
    e = m + (1.0 - K * m) * softmax(beta * _logging_scores(coords, K, rng))
    u = rng.random(len(e))[:, None]
    action = np.minimum((u > np.cumsum(e, axis=1)).sum(axis=1), K - 1)
    mean = mu[np.arange(len(action)), action]
    reward = mean + noise_std * rng.standard_normal(len(action)) if noise_std > 0 else mean.copy()
    return LoggedBandit(X=sample.points, action=action.astype(np.int64), reward=reward,
                        propensity=e[np.arange(len(action)), action], n_actions=K,
                        action_names=[str(a) for a in range(K)], mu=mu, e=e, dimension=float(sample.dimension),
                        smoothness=s, noise_std=noise_std, min_propensity=m,
                        source=f"synthetic: {sample.name}, d={sample.dimension}, D={sample.ambient_dim}",
                        coords=coords)


_MANIFOLDS = ("sphere", "graph_manifold", "torus", "swiss_roll", "helix", "rendered_objects")
_BANDIT_KEYS = ("n_actions", "smoothness", "noise_std", "min_propensity", "logging_strength", "reward_kind")


def logged_bandit(manifold: str = "sphere", n: int = 2000, *, seed: int = 0, **kwargs) -> LoggedBandit:
    """Draw covariates from a manifold generator and attach a logged bandit to them.

    Parameters
    ----------
    manifold : str
        One of ``"sphere"``, ``"graph_manifold"``, ``"torus"``, ``"swiss_roll"``, ``"helix"``,
        ``"rendered_objects"`` (:mod:`manireg.data.manifolds`).
    n : int
        Number of rows.
    seed : int
        Seed of the covariates (and, derived from it, of the bandit).
    **kwargs
        ``n_actions``, ``smoothness``, ``noise_std``, ``min_propensity``, ``logging_strength``,
        ``reward_kind`` go to :func:`make_logged_bandit`; the rest (``d``, ``ambient_dim``, ...) to the
        manifold generator.

    Examples
    --------
    >>> data = logged_bandit("sphere", 500, d=2, ambient_dim=10, n_actions=3, seed=1)
    >>> data.X.shape, data.n_actions
    ((500, 10), 3)
    """
    from . import manifolds

    if manifold not in _MANIFOLDS:
        raise ValueError(f"the 'manifold' parameter of logged_bandit must be one of {list(_MANIFOLDS)}; got {manifold!r}.")
    bandit = {k: kwargs.pop(k) for k in _BANDIT_KEYS if k in kwargs}
    sample = getattr(manifolds, manifold)(n, seed=seed, **kwargs)
    seq = np.random.SeedSequence([int(seed), 17])
    return make_logged_bandit(sample, seed=np.random.default_rng(seq), **bandit)


def _fail(msg):
    raise DataValidationError(msg)


def check_logged(X, action, reward, propensity=None, *, owner: str = "logged data", action_names=None):
    """Validate logged data; return ``(X, action codes, reward, propensity of the taken action or None,
    action names)``.

    ``action`` may hold any labels (ints or strings); they are coded ``0..K-1`` in sorted order.
    ``propensity`` is either the probability of the taken action per row, shape (N,), or the probabilities
    of all K actions per row, shape (N, K) in the order of the sorted labels (each row must then sum to one).

    Raises
    ------
    DataValidationError (a ValueError)
        Fewer than two distinct actions; rewards or propensities with NaN/inf; propensities outside (0, 1];
        rows of all-action propensities not summing to one (tolerance :data:`PROPENSITY_SUM_TOL`);
        mismatched lengths.
    """
    from .._validation import check_points

    X = check_points(X, owner=owner)
    N = X.shape[0]
    a_raw = np.asarray(action)
    if a_raw.ndim != 1 or len(a_raw) != N:
        _fail(f"{owner}: the action column must have one entry per row ({N}); got shape {a_raw.shape}.")
    if a_raw.dtype.kind == "f":
        bad = ~np.isfinite(a_raw)
        if bad.any():
            _fail(f"{owner}: the action column has {int(bad.sum())} missing or non-finite value(s) (first at row "
                  f"{int(np.argmax(bad))}). Drop those rows or fill them.")
    if action_names is None:
        labels, codes = np.unique(a_raw, return_inverse=True)
        names = [str(v.item() if hasattr(v, "item") else v) for v in labels]
        if a_raw.dtype.kind == "f" and np.all(labels == np.round(labels)):
            names = [str(int(v)) for v in labels]
    else:
        codes, names = a_raw.astype(np.int64), list(action_names)
    K = len(names)
    if K < 2:
        _fail(f"{owner}: the action column holds one action ({names[0] if names else 'none'}) in all {N} rows; "
              "off-policy learning compares actions, so at least 2 distinct actions must have been taken. "
              "Check the --action column (action= in Python).")
    r = np.asarray(reward, dtype=np.float64)
    if r.ndim != 1 or len(r) != N:
        _fail(f"{owner}: the reward column must have one entry per row ({N}); got shape {r.shape}.")
    bad = ~np.isfinite(r)
    if bad.any():
        _fail(f"{owner}: the reward column has {int(bad.sum())} NaN or infinite value(s) (first at row {int(np.argmax(bad))}); "
              "rewards must be finite numbers. Drop those rows or fill them.")
    p = None
    if propensity is not None:
        P = np.asarray(propensity, dtype=np.float64)
        if P.ndim == 2 and P.shape[1] == 1:
            P = P[:, 0]
        if P.shape[0] != N or P.ndim not in (1, 2):
            _fail(f"{owner}: propensities must have one row per data row ({N}); got shape {P.shape}.")
        if P.ndim == 2 and P.shape[1] != K:
            _fail(f"{owner}: {P.shape[1]} propensity columns were given but the action column holds {K} actions "
                  f"({', '.join(names)}); give one column (the taken action's propensity) or one per action.")
        bad = ~np.isfinite(P)
        if bad.any():
            _fail(f"{owner}: the propensities have {int(bad.sum())} NaN or infinite value(s); every propensity must be a "
                  "number in (0, 1].")
        out = (P <= 0) | (P > 1)
        if out.any():
            _fail(f"{owner}: {int(out.sum())} propensit{'y is' if out.sum() == 1 else 'ies are'} outside (0, 1] "
                  f"(min {P.min():.4g}, max {P.max():.4g}); a propensity is the logging policy's probability of an "
                  "action and must lie in (0, 1]. Check the --propensity column(s).")
        if P.ndim == 2:
            sums = P.sum(axis=1)
            off = np.abs(sums - 1.0) > PROPENSITY_SUM_TOL
            if off.any():
                i = int(np.argmax(off))
                _fail(f"{owner}: the propensities of all {K} actions must sum to one in every row; {int(off.sum())} "
                      f"row(s) do not (row {i} sums to {sums[i]:.6g}). Give the columns of all actions in the order "
                      f"{', '.join(names)}, or only the taken action's propensity.")
            p = P[np.arange(N), codes]
        else:
            p = P
    return X, codes.astype(np.int64), r, p, names


def load_logged(path, action, reward, propensity=None, *, features=None, drop=None) -> LoggedBandit:
    """Load logged bandit data from a CSV, Parquet or NPZ table.

    Parameters
    ----------
    path : str or os.PathLike
    action : str
        Column of the action taken (any labels; coded ``0..K-1`` in sorted order).
    reward : str
        Column of the observed reward (numbers, no NaN).
    propensity : str or list of str, optional
        The logged probability of the action taken (one column), or of every action (K columns in the
        order of the sorted action labels; each row must sum to one).
    features, drop : list of str, optional
        As in :func:`manireg.data.load_table`; the action and propensity columns are never features.

    Returns
    -------
    LoggedBandit
        Without ``mu``/``e`` (the truth is unknown for a table).

    Raises
    ------
    DataValidationError (a ValueError)
        Everything :func:`manireg.data.load_table` checks, plus :func:`check_logged`.
    """
    from .io import _read_frame, _suggest, load_table

    p = os.fspath(path)
    props = [] if propensity is None else ([propensity] if isinstance(propensity, str) else list(propensity))
    special = [str(action)] + [str(c) for c in props]
    if features is not None:
        clash = [c for c in features if str(c) in special or str(c) == str(reward)]
        if clash:
            _fail(f"feature column(s) {clash} are also the action, reward or propensity column; leave them out of --features.")
    table = load_table(p, target=reward, features=features,
                       drop=None if features is not None else list(drop or []) + special)
    ext = os.path.splitext(p)[1].lower()
    if ext == ".npz":
        with np.load(p, allow_pickle=False) as z:
            cols = {k: z[k] for k in z.files}
    elif ext in (".csv", ".parquet", ".pq"):
        frame = _read_frame(p, ext)
        cols = {str(c): frame[c].to_numpy() for c in frame.columns}
    else:
        _fail(f"logged data must be a table with named columns (.csv, .parquet or .npz); got '{ext}' for '{p}'.")
    for c in special:
        if c not in cols:
            _fail(f"column '{c}' is not in '{p}'.{_suggest(c, list(cols))} Pass the action column with --action COL "
                  "and the propensity column(s) with --propensity COL.")
    a = cols[str(action)]
    P = None
    if props:
        try:
            P = np.column_stack([np.asarray(cols[c], dtype=np.float64) for c in props])
        except (TypeError, ValueError):
            _fail(f"the propensity column(s) {props} of '{p}' must hold numbers in (0, 1].")
    X, codes, r, pt, names = check_logged(table.X, a, table.y, P, owner=f"'{os.path.basename(p)}'")
    return LoggedBandit(X=X, action=codes, reward=r, propensity=pt, n_actions=len(names), action_names=names,
                        source=p)
