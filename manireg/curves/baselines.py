"""Reference learners with known adaptive rates: k-nearest-neighbour regression and Gaussian kernel ridge.

A campaign shows the network's fitted exponent beside these, so a slope can be read against learners whose
rates on a d-dimensional manifold are established. Both are plain functions of the training data; the
campaign-level wrappers live in :mod:`manireg.curves.learners`.

Rules (``a = 2s / (2s + d)``, the minimax exponent of squared error):

* kNN: ``k = ceil(c_k * n^a)`` neighbours, clipped to ``[1, n]``. With ``k ~ n^(2s/(2s+d))`` the kNN
  estimate attains ``n^(-2s/(2s+d))`` for Lipschitz targets (``s <= 1``) in R^d [1]_ and adapts to the
  intrinsic dimension of data on a manifold without knowing it [2]_. ``c_k = 1`` by default: for
  ``d = 3, s = 1`` it gives ``k = 10`` at ``n = 256`` and ``k = 37`` at ``n = 8192``.
* Kernel ridge: Gaussian kernel ``exp(-|x - x'|^2 / (2 h^2))`` with bandwidth
  ``h = c_h * m * n^(-1/(2s+d))`` where ``m`` is the median pairwise distance of (up to 1000 of) the
  training points, and ridge penalty ``lambda = c_lambda * n^(-a)`` on the normalised loss
  ``(1/n) sum (y_i - f(x_i))^2 + lambda |f|^2``, the orders that give the minimax rate for local
  averaging and regularised least squares [1]_ [3]_. Defaults ``c_h = 1``, ``c_lambda = 1e-3``.
  Above ``max_exact`` training points (default 3000) the solve uses a Nyström approximation on
  ``max_exact`` landmarks drawn with the given seed (cost O(n m^2) instead of O(n^3)) [4]_.

References
----------
.. [1] L. Györfi, M. Kohler, A. Krzyżak, H. Walk, *A Distribution-Free Theory of Nonparametric
   Regression*, Springer (2002), Thm. 6.2 (kNN rate) and Ch. 5 (kernel estimates).
.. [2] S. Kpotufe, "k-NN regression adapts to local intrinsic dimension", NIPS (2011).
.. [3] A. Caponnetto, E. De Vito, "Optimal rates for the regularized least-squares algorithm",
   Found. Comput. Math. 7 (2007).
.. [4] C. Williams, M. Seeger, "Using the Nyström method to speed up kernel machines", NIPS (2001).
"""

from __future__ import annotations

import math

import numpy as np

from manireg._validation import check_float, check_int, check_points, check_target, make_rng

__all__ = [
    "knn_k",
    "knn_regress",
    "kernel_bandwidth",
    "kernel_ridge_penalty",
    "kernel_ridge_regress",
    "DEFAULT_KNN_C",
    "DEFAULT_BANDWIDTH_C",
    "DEFAULT_RIDGE_C",
    "DEFAULT_MAX_EXACT",
]

#: Constant of the kNN rule ``k = ceil(c * n^(2s/(2s+d)))``.
DEFAULT_KNN_C = 1.0
#: Constant of the bandwidth rule ``h = c * median distance * n^(-1/(2s+d))``.
DEFAULT_BANDWIDTH_C = 1.0
#: Constant of the ridge rule ``lambda = c * n^(-2s/(2s+d))`` (normalised loss).
DEFAULT_RIDGE_C = 1e-3
#: Largest training set solved exactly; above it, Nyström with this many landmarks.
DEFAULT_MAX_EXACT = 3000


def _rate(d, s, owner):
    d = check_float(d, "d", owner=owner, low=0.0, low_open=True)
    s = check_float(s, "s", owner=owner, low=0.0, low_open=True)
    return 2.0 * s / (2.0 * s + d)


def knn_k(n, d, s, c=DEFAULT_KNN_C) -> int:
    """Rate-optimal number of neighbours ``k = ceil(c * n^(2s/(2s+d)))``, clipped to ``[1, n]``.

    Parameters
    ----------
    n : int
        Training points, >= 1.
    d : float
        Intrinsic dimension, > 0.
    s : float
        Smoothness of the target, > 0 (the kNN rate is established for ``s <= 1``).
    c : float, default=1.0
        Constant in front of the rule, > 0.

    Returns
    -------
    int

    References
    ----------
    .. [1] Györfi, Kohler, Krzyżak, Walk (2002), Thm. 6.2.
    .. [2] Kpotufe, NIPS (2011).

    Examples
    --------
    >>> knn_k(256, d=3, s=1)
    10
    """
    owner = "knn_k"
    n = check_int(n, "n", owner=owner, low=1)
    a = _rate(d, s, owner)
    c = check_float(c, "c", owner=owner, low=0.0, low_open=True)
    return int(min(max(math.ceil(c * n**a), 1), n))


def knn_regress(X_train, y_train, X_query, k, *, method="auto", random_state=0) -> np.ndarray:
    """Uniform-weight k-nearest-neighbour regression (Euclidean distance).

    The prediction at a query point is the mean target of its ``k`` nearest training points; it equals
    :class:`sklearn.neighbors.KNeighborsRegressor` with ``n_neighbors=k`` up to float rounding (and to
    the tie-breaking order of equidistant points).

    Parameters
    ----------
    X_train : array of shape (n, D)
    y_train : array of shape (n,)
    X_query : array of shape (m, D)
    k : int
        Neighbours, in ``[1, n]``.
    method : {"auto", "exact", "approximate"}, default="auto"
        Neighbour search (:func:`manireg.geometry.neighbors.query_neighbors`): exact up to
        ``QUERY_APPROXIMATE_ABOVE`` training points; above, one nearest-neighbour descent graph over the
        training points and the queries, each query's neighbours read from it. Queries that start with the
        training points themselves (as in a campaign cell) are recognised and not added twice.
    random_state : int, default=0
        Seed of the approximate index.

    Returns
    -------
    ndarray of shape (m,)

    References
    ----------
    .. [1] Györfi, Kohler, Krzyżak, Walk (2002), Ch. 6.
    """
    from manireg.geometry.neighbors import leading_rows_of, query_neighbors

    owner = "knn_regress"
    # float32 rows stay float32 (a campaign's large kNN cells read them so: half the memory, and the
    # approximate search works in float32 anyway); anything else is float64
    work = np.float32 if getattr(X_train, "dtype", None) == np.float32 and getattr(X_query, "dtype", None) == np.float32 \
        else np.float64
    X_train = check_points(X_train, name="X_train", owner=owner, min_samples=1, dtype=work)
    y_train = check_target(y_train, X_train.shape[0], name="y_train", owner=owner)
    X_query = check_points(X_query, name="X_query", owner=owner, min_samples=1, dtype=work)
    k = check_int(k, "k", owner=owner, low=1, high=X_train.shape[0])
    if X_query.shape[1] != X_train.shape[1]:
        raise ValueError(
            f"{owner}: X_query has {X_query.shape[1]} features but X_train has {X_train.shape[1]}; they must match."
        )
    n = X_train.shape[0]
    same = X_query.shape[0] >= n and (leading_rows_of(X_train, X_query) or np.array_equal(X_query[:n], X_train))
    self_rows = n if same else 0
    idx = query_neighbors(X_train, X_query, k, method=method, random_state=random_state, self_rows=self_rows,
                          owner=owner).indices
    return y_train[idx].mean(axis=1)


def _sq_dists(A, B):
    d2 = (A * A).sum(1)[:, None] + (B * B).sum(1)[None, :] - 2.0 * A @ B.T
    return np.maximum(d2, 0.0)


def kernel_bandwidth(X_train, d, s, c=DEFAULT_BANDWIDTH_C, *, seed=0) -> float:
    """Gaussian bandwidth ``h = c * m * n^(-1/(2s+d))``, ``m`` the median pairwise distance.

    ``m`` is computed on at most 1000 training points drawn with ``seed`` (exact below that), so the
    rule costs O(1e6 D) at most.

    References
    ----------
    .. [1] Györfi, Kohler, Krzyżak, Walk (2002), Ch. 5.
    """
    owner = "kernel_bandwidth"
    X_train = check_points(X_train, name="X_train", owner=owner, min_samples=2)
    _rate(d, s, owner)
    c = check_float(c, "c", owner=owner, low=0.0, low_open=True)
    n = X_train.shape[0]
    sub = X_train
    if n > 1000:
        sub = X_train[make_rng(seed).choice(n, 1000, replace=False)]
    d2 = _sq_dists(sub, sub)
    iu = np.triu_indices(sub.shape[0], k=1)
    m = float(np.sqrt(np.median(d2[iu])))
    if not m > 0:
        m = 1.0  # all points equal: any bandwidth gives the constant fit
    return c * m * n ** (-1.0 / (2.0 * float(s) + float(d)))


def kernel_ridge_penalty(n, d, s, c=DEFAULT_RIDGE_C) -> float:
    """Ridge penalty ``lambda = c * n^(-2s/(2s+d))`` of the normalised loss.

    References
    ----------
    .. [1] Caponnetto, De Vito, Found. Comput. Math. 7 (2007).
    """
    owner = "kernel_ridge_penalty"
    n = check_int(n, "n", owner=owner, low=1)
    a = _rate(d, s, owner)
    c = check_float(c, "c", owner=owner, low=0.0, low_open=True)
    return c * n ** (-a)


def kernel_ridge_regress(X_train, y_train, X_query, *, bandwidth, penalty, max_exact=DEFAULT_MAX_EXACT, seed=0):
    """Gaussian kernel ridge regression, exact up to ``max_exact`` points and Nyström above.

    Solves ``min_f (1/n) sum (y_i - f(x_i))^2 + penalty * |f|_H^2`` on centred targets. Exact:
    ``alpha = (K + n penalty I)^-1 (y - ybar)``. Nyström on ``m = max_exact`` landmarks drawn with
    ``seed``: ``beta = (K_nm^T K_nm + n penalty K_mm)^-1 K_nm^T (y - ybar)``.

    Parameters
    ----------
    X_train, y_train : training data
    X_query : points to predict at
    bandwidth : float > 0
    penalty : float > 0
    max_exact : int, default=3000
    seed : int, default=0
        Seed of the landmark draw (unused on the exact path).

    Returns
    -------
    ndarray of shape (m,)

    References
    ----------
    .. [1] Caponnetto, De Vito, Found. Comput. Math. 7 (2007).
    .. [2] Williams, Seeger, NIPS (2001).
    """
    import scipy.linalg

    owner = "kernel_ridge_regress"
    X_train = check_points(X_train, name="X_train", owner=owner, min_samples=1)
    y_train = check_target(y_train, X_train.shape[0], name="y_train", owner=owner)
    X_query = check_points(X_query, name="X_query", owner=owner, min_samples=1)
    h = check_float(bandwidth, "bandwidth", owner=owner, low=0.0, low_open=True)
    lam = check_float(penalty, "penalty", owner=owner, low=0.0, low_open=True)
    max_exact = check_int(max_exact, "max_exact", owner=owner, low=1)
    n = X_train.shape[0]
    ybar = float(y_train.mean())
    yc = y_train - ybar
    gamma = 1.0 / (2.0 * h * h)
    if n <= max_exact:
        K = np.exp(-gamma * _sq_dists(X_train, X_train))
        K[np.diag_indices_from(K)] += n * lam
        alpha = scipy.linalg.solve(K, yc, assume_a="pos")
        return ybar + np.exp(-gamma * _sq_dists(X_query, X_train)) @ alpha
    land = X_train[np.sort(make_rng(seed).choice(n, max_exact, replace=False))]
    Knm = np.exp(-gamma * _sq_dists(X_train, land))
    Kmm = np.exp(-gamma * _sq_dists(land, land))
    A = Knm.T @ Knm + n * lam * Kmm
    A[np.diag_indices_from(A)] += 1e-10 * np.trace(A) / max_exact
    beta = scipy.linalg.solve(A, Knm.T @ yc, assume_a="pos")
    return ybar + np.exp(-gamma * _sq_dists(X_query, land)) @ beta


def knn_class_proba(X_train, y_train, X_query, k, n_classes, smoothing=0.0) -> np.ndarray:
    """Class probabilities of uniform-weight k-nearest-neighbour classification (Euclidean distance).

    ``p_c(x) = (count_c + smoothing) / (k + n_classes * smoothing)``, ``count_c`` the neighbours of class c
    among the ``k`` nearest training points. With ``smoothing=0`` this equals
    :meth:`sklearn.neighbors.KNeighborsClassifier.predict_proba` with ``n_neighbors=k`` (up to the
    tie-breaking order of equidistant points), and ``argmax`` its ``predict``. A positive smoothing (add-
    ``smoothing`` estimate [2]_) keeps every probability above zero, so the cross-entropy stays finite.

    Parameters
    ----------
    X_train : array of shape (n, D)
    y_train : array of shape (n,)
        Class codes in ``[0, n_classes)``.
    X_query : array of shape (m, D)
    k : int
        Neighbours, in ``[1, n]``.
    n_classes : int
    smoothing : float, default=0.0

    Returns
    -------
    ndarray of shape (m, n_classes)

    References
    ----------
    .. [1] L. Devroye, L. Györfi, G. Lugosi, *A Probabilistic Theory of Pattern Recognition* (1996), Ch. 11.
    .. [2] R. Krichevsky, V. Trofimov, IEEE Trans. Inform. Theory 27 (1981) (the add-1/2 estimate).
    """
    from sklearn.neighbors import NearestNeighbors

    owner = "knn_class_proba"
    X_train = check_points(X_train, name="X_train", owner=owner, min_samples=1)
    y_train = check_target(y_train, X_train.shape[0], name="y_train", owner=owner).astype(np.int64)
    X_query = check_points(X_query, name="X_query", owner=owner, min_samples=1)
    k = check_int(k, "k", owner=owner, low=1, high=X_train.shape[0])
    n_classes = check_int(n_classes, "n_classes", owner=owner, low=2)
    if X_query.shape[1] != X_train.shape[1]:
        raise ValueError(
            f"{owner}: X_query has {X_query.shape[1]} features but X_train has {X_train.shape[1]}; they must match."
        )
    nn = NearestNeighbors(n_neighbors=k, algorithm="brute").fit(X_train)
    idx = nn.kneighbors(X_query, return_distance=False)
    labels = y_train[idx]  # (m, k)
    counts = np.stack([(labels == c).sum(axis=1) for c in range(n_classes)], axis=1).astype(np.float64)
    return (counts + smoothing) / (k + n_classes * smoothing)


def logistic_proba(X_train, y_train, X_query, n_classes, C=1.0, seed=0) -> np.ndarray:
    """Class probabilities of multinomial logistic regression on the standardised raw input (L2 penalty
    ``1 / C``; scikit-learn's ``LogisticRegression``), columns for every class ``0..n_classes-1`` (a class
    absent from the training rows gets probability 0)."""
    from sklearn.linear_model import LogisticRegression
    from sklearn.preprocessing import StandardScaler

    scaler = StandardScaler().fit(X_train)
    y = np.asarray(y_train).astype(np.int64)
    P = np.zeros((len(X_query), n_classes))
    if np.unique(y).size == 1:  # one class in the training rows: predict it
        P[:, y[0]] = 1.0
        return P
    model = LogisticRegression(C=C, max_iter=1000, random_state=seed).fit(scaler.transform(X_train), y)
    P[:, model.classes_] = model.predict_proba(scaler.transform(X_query))
    return P
