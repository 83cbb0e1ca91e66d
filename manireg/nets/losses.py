"""Task losses of the batched trainer: per-row values and gradients with respect to the output layer.

The trainer's output layer gives, for each replica r and row i, a vector ``z_ri`` of ``K`` scores
(``K = 1`` for regression). Each loss here is a function of ``z_ri`` and the row's target ``y_ri``:

- ``"mse"``: ``(z - y)^2`` with ``y`` a float (standardised target units inside the trainer);
- ``"cross_entropy"``: multinomial logistic loss ``-sum_k y_k log softmax(z)_k`` with ``y`` the one-hot
  row of the class label (binary classification is ``K = 2``) [1]_;
- ``"policy"``: minus the expected reward of the softmax policy, ``-sum_a softmax(z)_a Gamma_a``, with
  ``y = Gamma`` the row's vector of scores, one per action [2]_.

:func:`output_gradient` returns ``d/dz`` of ``sum_ri w_ri loss(z_ri, y_ri)``; the trainer propagates it
back through the hidden layers by hand. Every operation acts on one row at a time (softmax and the
log-sum-exp along the last axis), so a replica's numbers do not depend on the other replicas in its stack.

References
----------
.. [1] C. M. Bishop, Pattern Recognition and Machine Learning (2006), sec. 4.3.4 (softmax cross-entropy
   and its gradient ``softmax(z) - y``).
.. [2] R. J. Williams, "Simple statistical gradient-following algorithms for connectionist reinforcement
   learning", Machine Learning 8 (1992) (gradient of an expected reward under a softmax policy).
"""

from __future__ import annotations

import torch

__all__ = ["LOSSES", "output_gradient", "row_loss", "stopping_loss", "probabilities"]

LOSSES = ("mse", "cross_entropy", "policy")


def probabilities(z):
    """Softmax of the scores ``z`` (..., K) along the last axis (class or action probabilities)."""
    return torch.softmax(z, dim=-1)


def row_loss(loss, z, y):
    """Loss of each row, shape ``z.shape[:-1]`` for the K-score losses.

    ``z``: mse -> predictions (R, B) in the units of ``y`` (R, B); cross_entropy/policy -> scores (R, B, K)
    with ``y`` one-hot labels or action scores (R, B, K). Cross-entropy is in nats.
    """
    if loss == "mse":
        return (z - y) ** 2
    if loss == "cross_entropy":
        return -(torch.log_softmax(z, dim=-1) * y).sum(dim=-1)
    if loss == "policy":
        return -(probabilities(z) * y).sum(dim=-1)
    raise ValueError(f"unknown loss {loss!r}; allowed: {', '.join(LOSSES)}.")


def stopping_loss(loss, z, y):
    """The per-row number early stopping tracks: :func:`row_loss`, except for ``"policy"`` where it is the
    regret ``max_a Gamma_a - sum_a softmax(z)_a Gamma_a`` (>= 0). The regret differs from minus the
    policy value by a constant of each row, so both rank networks alike, and a non-negative number makes
    the trainer's relative improvement threshold ``(1 - tol) * best`` meaningful."""
    if loss == "policy":
        return y.amax(dim=-1) - (probabilities(z) * y).sum(dim=-1)
    return row_loss(loss, z, y)


def output_gradient(loss, z, y, w):
    """Gradient of ``sum_ri w_ri loss(z_ri, y_ri)`` with respect to the scores ``z`` (R, B, K).

    ``w`` is a (R, B) tensor of row weights or a float (one weight for every row). ``z`` may be
    overwritten (the result can share its memory). For ``"mse"`` (K = 1) ``y`` is (R, B); for the other
    losses (R, B, K).
    """
    wk = w if isinstance(w, float) else w.unsqueeze(-1)
    if loss == "mse":
        # the regression trainer's original expression, kept operation for operation (bit-identical numbers)
        return z.sub_(y.unsqueeze(-1)).mul_(2.0 * wk)
    p = probabilities(z)
    if loss == "cross_entropy":
        return p.sub_(y).mul_(wk)
    if loss == "policy":
        # d/dz_a of -sum_b p_b G_b = -p_a (G_a - sum_b p_b G_b)
        mean = (p * y).sum(dim=-1, keepdim=True)
        return (y - mean).mul_(p).mul_(-1.0).mul_(wk)
    raise ValueError(f"unknown loss {loss!r}; allowed: {', '.join(LOSSES)}.")
