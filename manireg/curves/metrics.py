"""Classification metrics of a campaign cell, from predicted class probabilities.

Each function takes ``proba`` (m, K) (rows are probability vectors) and the true labels (codes in
``[0, K)``) or the exact class probabilities ``bayes`` (m, K) where they are known (synthetic data):

- :func:`cross_entropy`: ``mean_i -log p_i[y_i]`` in nats (the logistic risk on the test labels), with
  probabilities clipped below at float64's machine epsilon, as scikit-learn's ``log_loss`` does;
- :func:`error_rate`: misclassification rate of ``argmax p`` (ties to the lowest class);
- :func:`excess_logistic_risk`: ``mean_i KL(eta_i || p_i) = mean_i sum_k eta_ik log(eta_ik / p_ik)``: the
  logistic risk of ``p`` minus that of the Bayes probabilities, conditional on the test points. Zero for
  ``p = eta``, positive for any other ``p`` [1]_;
- :func:`excess_error_rate`: ``mean_i (max_k eta_ik - eta_i[argmax p_i])``: the misclassification risk of
  ``argmax p`` minus the Bayes risk, conditional on the test points [2]_;
- :func:`calibration_error`: expected calibration error of the top-class confidence with ``n_bins``
  equal-width bins on [0, 1] (default 10): ``sum_b (|B_b| / m) |accuracy(B_b) - mean confidence(B_b)|`` [3]_.

The conditional (given-x) excess risks use the exact ``eta`` at the test points instead of the test labels,
so they carry no label-sampling noise: their only randomness is the training data and the test points.

References
----------
.. [1] T. Zhang, "Statistical behavior and consistency of classification methods based on convex risk
   minimization", Ann. Statist. 32 (2004) (excess logistic risk as a KL divergence).
.. [2] L. Devroye, L. Györfi, G. Lugosi, *A Probabilistic Theory of Pattern Recognition* (1996), Thm. 2.2.
.. [3] M. P. Naeini, G. Cooper, M. Hauskrecht, AAAI (2015); C. Guo, G. Pleiss, Y. Sun, K. Q. Weinberger,
   ICML (2017) (equal-width bins of the top-class confidence).
"""

from __future__ import annotations

import numpy as np

__all__ = ["CLASSIFICATION_COLUMNS", "cross_entropy", "error_rate", "excess_logistic_risk", "excess_error_rate",
           "calibration_error", "classification_metrics", "ECE_BINS"]

#: Row columns the classification learners fill (see :func:`classification_metrics`).
CLASSIFICATION_COLUMNS = ("test_cross_entropy", "excess_logistic_risk", "test_error_rate", "excess_error_rate",
                          "calibration_error")
#: Equal-width bins of the calibration error.
ECE_BINS = 10
_EPS = np.finfo(np.float64).eps


def _proba(p):
    p = np.asarray(p, dtype=np.float64)
    if p.ndim != 2 or p.shape[1] < 2:
        raise ValueError(f"class probabilities must be an (m, K) array with K >= 2; got shape {p.shape}.")
    return p


def cross_entropy(proba, labels) -> float:
    """Mean ``-log p[y]`` (nats), probabilities clipped to ``[eps, 1 - eps]``."""
    p = _proba(proba)
    y = np.asarray(labels).astype(np.int64)
    return float(np.mean(-np.log(np.clip(p[np.arange(len(y)), y], _EPS, 1.0 - _EPS))))


def error_rate(proba, labels) -> float:
    """Share of rows whose ``argmax p`` is not the label."""
    p = _proba(proba)
    return float(np.mean(p.argmax(axis=1) != np.asarray(labels).astype(np.int64)))


def excess_logistic_risk(proba, bayes) -> float:
    """``mean_i sum_k eta_ik (log eta_ik - log p_ik)`` (>= 0; 0 only for ``p = eta``)."""
    p, eta = _proba(proba), _proba(bayes)
    logp = np.log(np.clip(p, _EPS, 1.0))
    loge = np.log(np.where(eta > 0, eta, 1.0))
    return float(np.mean((eta * (loge - logp)).sum(axis=1)))


def excess_error_rate(proba, bayes) -> float:
    """``mean_i (max_k eta_ik - eta_i[argmax p_i])`` (>= 0)."""
    p, eta = _proba(proba), _proba(bayes)
    return float(np.mean(eta.max(axis=1) - eta[np.arange(len(p)), p.argmax(axis=1)]))


def calibration_error(proba, labels, n_bins: int = ECE_BINS) -> float:
    """Expected calibration error of the top-class confidence, ``n_bins`` equal-width bins ``(b/n, (b+1)/n]``
    (a confidence of exactly 0 goes to the first bin)."""
    p = _proba(proba)
    y = np.asarray(labels).astype(np.int64)
    conf = p.max(axis=1)
    correct = (p.argmax(axis=1) == y).astype(np.float64)
    bins = np.clip(np.ceil(conf * n_bins).astype(np.int64) - 1, 0, n_bins - 1)
    total = 0.0
    for b in range(n_bins):
        sel = bins == b
        if sel.any():
            total += sel.mean() * abs(correct[sel].mean() - conf[sel].mean())
    return float(total)


def classification_metrics(proba, labels, bayes=None) -> dict:
    """The classification row columns of a cell: test cross-entropy, error rate, calibration error and, when
    ``bayes`` is given, the two excess risks (else None)."""
    return {
        "test_cross_entropy": cross_entropy(proba, labels),
        "excess_logistic_risk": None if bayes is None else excess_logistic_risk(proba, bayes),
        "test_error_rate": error_rate(proba, labels),
        "excess_error_rate": None if bayes is None else excess_error_rate(proba, bayes),
        "calibration_error": calibration_error(proba, labels),
    }
