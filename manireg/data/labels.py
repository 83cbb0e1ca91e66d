"""Class labels on a manifold with known Bayes probabilities, and reading class labels from a table.

:func:`make_classification` draws smooth scores of known Hölder order ``s`` on a sample's parametrising
coordinates (:func:`manireg.data.targets.holder_target`, unit standard deviation) and turns them into class
probabilities through a softmax link with temperature ``T``:

- ``n_classes = 2``: one score ``f``; ``P(y = 1 | x) = 1 / (1 + exp(-f(x) / T))`` (the logistic link);
- ``n_classes = K > 2``: K independent scores ``f_k``; ``P(y = k | x) = softmax(f(x) / T)_k``.

The link is analytic, so the class probabilities have the Hölder order of the scores. Smaller ``T`` makes
the classes more separable (``T -> 0`` is a deterministic labelling by the largest score). With
``label_noise = rho`` each label is replaced, with probability ``rho``, by a class drawn uniformly (symmetric
label noise [2]_); the conditional probabilities then are ``(1 - rho) eta + rho / K``, and that is what
``bayes_proba`` holds. So the Bayes classifier (``argmax bayes_proba``) and the conditional Bayes risks
are known exactly at every point: misclassification ``1 - max_k eta_k(x)``, logistic (cross-entropy)
``-sum_k eta_k(x) log eta_k(x)`` [1]_.

References
----------
.. [1] L. Devroye, L. Györfi, G. Lugosi, *A Probabilistic Theory of Pattern Recognition*, Springer (1996),
   Ch. 2 (Bayes classifier and Bayes error).
.. [2] N. Natarajan, I. S. Dhillon, P. Ravikumar, A. Tewari, "Learning with noisy labels", NIPS (2013)
   (symmetric / class-conditional label noise).
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field

import numpy as np

from .._results import ResultMixin
from .._validation import DataValidationError, check_float, check_int, make_rng
from .manifolds import ManifoldSample
from .targets import HolderTarget, holder_target

__all__ = ["ClassificationSample", "make_classification", "encode_labels", "read_label_column"]


@dataclass
class ClassificationSample(ResultMixin):
    """Inputs, integer labels and the exact class probabilities of a synthetic classification problem.

    Attributes
    ----------
    X : (n, D) array
    y : (n,) int array of labels in ``[0, n_classes)``.
    scores : (n, K') array of the smooth scores (K' = 1 for two classes, else K).
    bayes_proba : (n, K) array of ``P(y = k | x)`` (label noise included).
    smoothness, temperature, label_noise : float
    n_classes : int
    manifold : ManifoldSample
    targets : list of HolderTarget (one per score)
    """

    X: np.ndarray = field(repr=False)
    y: np.ndarray = field(repr=False)
    scores: np.ndarray = field(repr=False)
    bayes_proba: np.ndarray = field(repr=False)
    smoothness: float
    temperature: float
    label_noise: float
    n_classes: int
    manifold: ManifoldSample = field(repr=False)
    targets: list = field(repr=False, default_factory=list)
    _skip_in_dict = ("X", "y", "scores", "bayes_proba", "targets")

    @property
    def dimension(self) -> int:
        return self.manifold.dimension

    @property
    def ambient_dim(self) -> int:
        return self.manifold.ambient_dim

    @property
    def bayes_error_rate(self) -> float:
        """Misclassification rate of the Bayes classifier, averaged over the sample's points:
        ``mean(1 - max_k eta_k(x))`` (exact given the points)."""
        return float(np.mean(1.0 - self.bayes_proba.max(axis=1)))

    @property
    def bayes_cross_entropy(self) -> float:
        """Logistic (cross-entropy) risk of the Bayes probabilities, in nats, averaged over the sample's
        points: ``mean(-sum_k eta_k log eta_k)``."""
        p = self.bayes_proba
        return float(np.mean(-(p * np.log(np.where(p > 0, p, 1.0))).sum(axis=1)))


def _softmax(z):
    z = z - z.max(axis=1, keepdims=True)
    e = np.exp(z)
    return e / e.sum(axis=1, keepdims=True)


def make_classification(sample: ManifoldSample, n_classes: int = 2, smoothness: float = 1.0, *,
                        temperature: float = 0.5, label_noise: float = 0.0, kind: str = "lacunary", n_terms: int = 12,
                        seed=None) -> ClassificationSample:
    """Labels on a manifold sample from smooth scores through a logistic/softmax link (module docstring).

    Parameters
    ----------
    sample : ManifoldSample
    n_classes : int, default=2
        K >= 2.
    smoothness : float, default=1.0
        Hölder order s of the scores (and of the class probabilities).
    temperature : float, default=0.5
        T > 0 of the link; the scores have unit standard deviation, so ``T = 0.5`` gives logits of
        standard deviation 2.
    label_noise : float, default=0.0
        Probability rho in [0, 1) that a label is replaced by a uniformly drawn class.
    kind, n_terms :
        Family and number of terms of the scores (:func:`manireg.data.targets.holder_target`).
    seed : int, Generator or None

    Returns
    -------
    ClassificationSample

    Examples
    --------
    >>> from manireg.data import sphere
    >>> c = make_classification(sphere(500, d=2, ambient_dim=5, seed=0), n_classes=3, seed=1)
    >>> c.bayes_proba.shape, sorted(set(c.y.tolist()))
    ((500, 3), [0, 1, 2])
    """
    owner = "make_classification"
    if not isinstance(sample, ManifoldSample):
        raise ValueError(f"the 'sample' parameter of {owner} must be a ManifoldSample (e.g. from "
                         f"manireg.data.sphere); got {type(sample).__name__}.")
    K = check_int(n_classes, "n_classes", owner=owner, low=2)
    s = check_float(smoothness, "smoothness", owner=owner, low=0.0, low_open=True)
    T = check_float(temperature, "temperature", owner=owner, low=0.0, low_open=True)
    rho = check_float(label_noise, "label_noise", owner=owner, low=0.0, high=1.0, high_open=True)
    rng = make_rng(seed)
    q = sample.coords.shape[1]
    n_scores = 1 if K == 2 else K
    targets: list[HolderTarget] = [holder_target(q, s, kind=kind, n_terms=n_terms, seed=rng) for _ in range(n_scores)]
    scores = np.column_stack([t(sample.coords) for t in targets])
    logits = np.column_stack([np.zeros(len(scores)), scores[:, 0]]) if K == 2 else scores
    eta = _softmax(logits / T)
    eta = (1.0 - rho) * eta + rho / K
    u = rng.uniform(size=(len(eta), 1))
    y = (u > np.cumsum(eta, axis=1)).sum(axis=1)  # inverse-CDF draw of one label per row
    y = np.minimum(y, K - 1).astype(np.int64)
    return ClassificationSample(sample.points, y, scores, eta, s, T, rho, K, sample, targets)


def encode_labels(values, *, name: str = "labels", owner: str = "encode_labels"):
    """Class labels (integers, integral floats, strings or booleans) as codes ``0..K-1`` and the class list.

    Classes are sorted (numbers numerically, otherwise as strings); ``codes[i]`` is the index of
    ``values[i]`` in ``classes``.

    Raises
    ------
    DataValidationError
        Missing values (NaN, None, empty strings), numbers that are not integers (a continuous target
        rather than classes), mixed numbers and strings, or an array that is not 1-D.

    Examples
    --------
    >>> encode_labels(["cat", "dog", "cat"])
    (array([0, 1, 0]), ['cat', 'dog'])
    """
    arr = np.asarray(values, dtype=object)
    if arr.ndim == 2 and arr.shape[1] == 1:
        arr = arr[:, 0]
    if arr.ndim != 1:
        raise DataValidationError(f"{owner}: {name} must be one column of class labels; got shape {arr.shape}.")
    missing = [i for i, v in enumerate(arr) if v is None or (isinstance(v, str) and not v.strip())
               or (isinstance(v, (float, np.floating)) and not np.isfinite(v))]
    if missing:
        raise DataValidationError(
            f"{owner}: {name} has {len(missing)} missing or empty label(s) (first at row {missing[0]}). "
            "Every row needs a class; drop those rows first."
        )
    is_num = [isinstance(v, (bool, np.bool_, int, float, np.integer, np.floating)) for v in arr]
    if all(is_num):
        num = np.array([float(v) for v in arr])
        frac = np.flatnonzero(num != np.round(num))
        if len(frac):
            raise DataValidationError(
                f"{owner}: {name} cannot be read as classes: {len(frac)} value(s) are not whole numbers (row "
                f"{frac[0]} holds {arr[frac[0]]!r}). Classes are integers or strings; a continuous column is a "
                "regression target (leave out --task classify)."
            )
        classes = sorted({int(v) for v in num})
        index = {c: i for i, c in enumerate(classes)}
        return np.array([index[int(v)] for v in num], dtype=np.int64), classes
    if any(is_num):
        raise DataValidationError(
            f"{owner}: {name} mixes numbers and strings; write every class the same way (all numbers or all text)."
        )
    text = [str(v).strip() for v in arr]
    classes = sorted(set(text))
    index = {c: i for i, c in enumerate(classes)}
    return np.array([index[v] for v in text], dtype=np.int64), classes


def read_label_column(path, column):
    """The raw values of one column of a table file (CSV, Parquet, NPZ key or NPY column index), as read:
    strings stay strings. For class labels that :func:`manireg.data.load_table` would reject as non-numeric.

    Raises
    ------
    DataValidationError
        A missing file or column (the message lists the columns).
    """
    import pandas as pd

    p = os.fspath(path)
    ext = os.path.splitext(p)[1].lower()
    if not os.path.isfile(p):
        raise DataValidationError(f"no such file: '{p}'.")
    if ext in (".csv", ".parquet"):
        try:
            frame = pd.read_csv(p, dtype=str, keep_default_na=False) if ext == ".csv" else pd.read_parquet(p)
        except Exception as exc:  # the reader's own words
            raise DataValidationError(f"could not read '{p}': {exc}") from None
        cols = [str(c) for c in frame.columns]
        frame.columns = cols
        if str(column) not in cols:
            from manireg.data.io import _preview, _suggest

            raise DataValidationError(f"target column '{column}' is not in '{p}'.{_suggest(column, cols)} "
                                      f"Columns are: {_preview(cols)}. Pass the label column's name with --target.")
        vals = frame[str(column)].to_numpy(dtype=object)
        if ext == ".csv":  # CSV cells arrive as text: numbers back to numbers where every cell is one
            try:
                num = np.array([float(v) for v in vals])
                vals = num.astype(object)
            except ValueError:
                vals = np.array([v if v.strip() else None for v in vals], dtype=object)
        return vals
    if ext == ".npz":
        with np.load(p, allow_pickle=False) as z:
            if str(column) not in z.files:
                raise DataValidationError(f"array '{column}' is not in '{p}'. Arrays are: {', '.join(z.files)}.")
            return np.asarray(z[str(column)]).astype(object)
    if ext == ".npy":
        a = np.load(p, allow_pickle=False)
        j = int(column)
        if a.ndim != 2 or not (-a.shape[1] <= j < a.shape[1]):
            raise DataValidationError(f"column {column} is not in '{p}' (shape {a.shape}).")
        return a[:, j].astype(object)
    raise DataValidationError(f"'{p}': unsupported format '{ext}'; use CSV, Parquet, NPZ or NPY.")
