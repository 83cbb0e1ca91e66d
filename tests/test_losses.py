"""Task losses of the batched trainer: gradients against autograd, values against scikit-learn, a
logistic fit against scikit-learn's, stack independence for every loss, bad labels."""

import numpy as np
import pytest
import torch
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import accuracy_score, log_loss

from manireg._validation import DataValidationError
from manireg.nets import BatchedTrainer, ReplicaTask, TrainConfig
from manireg.nets.losses import output_gradient, row_loss
from manireg.nets.training import _loss_grads
from manireg.theory import size_network

D, K = 6, 3


def config(**kw):
    kw.setdefault("n_threads", 1)
    return TrainConfig(**kw)


def blobs(n, seed, k=K, spread=1.0):
    """k Gaussian classes in R^D with means on the first k axes (scale 2) and unit covariance x spread."""
    rng = np.random.default_rng(seed)
    y = rng.integers(0, k, n)
    X = spread * rng.normal(size=(n, D))
    X[np.arange(n), y] += 2.0
    return X, y


def reference_loss(loss, z, y, w):
    """Per-loss reference written with torch's own functions (autograd differentiates it)."""
    if loss == "mse":
        return ((z.squeeze(-1) - y) ** 2 * w).sum()
    if loss == "cross_entropy":
        labels = y.argmax(dim=-1)
        per_row = torch.nn.functional.cross_entropy(z.reshape(-1, z.shape[-1]), labels.reshape(-1), reduction="none")
        return (per_row.reshape(w.shape) * w).sum()
    return -((torch.softmax(z, dim=-1) * y).sum(dim=-1) * w).sum()


@pytest.mark.parametrize("loss", ["mse", "cross_entropy", "policy"])
def test_gradients_match_autograd(loss):
    # Reference: torch.autograd on the same stacked network and loss written with torch functions.
    g = torch.Generator().manual_seed(1)
    R, B = 3, 11
    k = 1 if loss == "mse" else 4
    sizes = [D, 9, 9, k]
    Ws = [torch.randn(R, a, b, generator=g) / a**0.5 for a, b in zip(sizes[:-1], sizes[1:])]
    bs = [0.1 * torch.randn(R, 1, b, generator=g) for b in sizes[1:]]
    x = torch.randn(R, B, D, generator=g)
    if loss == "mse":
        y = torch.randn(R, B, generator=g)
    elif loss == "cross_entropy":
        y = torch.nn.functional.one_hot(torch.randint(0, k, (R, B), generator=g), k).float()
    else:
        y = torch.randn(R, B, k, generator=g)
    w = torch.rand(R, B, generator=g)
    params = [p.clone().requires_grad_(True) for p in Ws + bs]
    h = x
    for i in range(len(Ws)):
        h = torch.baddbmm(params[len(Ws) + i], h, params[i])
        if i < len(Ws) - 1:
            h = torch.relu(h)
    ref = torch.autograd.grad(reference_loss(loss, h, y, w), params)
    for a, b in zip(_loss_grads(Ws, bs, x, y, w, loss=loss), ref):
        torch.testing.assert_close(a, b, rtol=1e-5, atol=1e-6)
    # a float weight is the same as a constant weight tensor
    for a, b in zip(_loss_grads(Ws, bs, x, y, 0.25, loss=loss), _loss_grads(Ws, bs, x, y, torch.full((R, B), 0.25), loss=loss)):
        torch.testing.assert_close(a, b, rtol=1e-6, atol=1e-7)
    # the output gradient alone against autograd of the row losses
    z = torch.randn(R, B, k, generator=g, requires_grad=True)
    target = y if loss != "mse" else y
    val = (row_loss(loss, z.squeeze(-1) if loss == "mse" else z, target) * w).sum()
    (gz,) = torch.autograd.grad(val, z)
    torch.testing.assert_close(output_gradient(loss, z.detach().clone(), target, w), gz, rtol=1e-5, atol=1e-6)


def test_cross_entropy_and_accuracy_equal_sklearn():
    # scikit-learn's log_loss and accuracy_score (reference) on the trainer's own predicted probabilities:
    # the trainer's reported cross-entropy is the same number.
    X, y = blobs(500, seed=0)
    Xv, yv = blobs(200, seed=1)
    trainer = BatchedTrainer(size_network(400, 2, 1, ambient_dim=D), config(max_steps=80, min_steps=0),
                             loss="cross_entropy", n_outputs=K)
    (res,) = trainer.fit([ReplicaTask(X, y, Xv, yv, seed=0)])
    P = trainer.predict(Xv, replica=0)
    assert P.shape == (200, K)
    np.testing.assert_allclose(P.sum(axis=1), 1.0, atol=1e-6)
    assert res.val_loss == pytest.approx(log_loss(yv, P, labels=list(range(K))), rel=1e-5)
    assert res.train_loss == pytest.approx(log_loss(y, trainer.predict(X, replica=0), labels=list(range(K))), rel=1e-5)
    assert np.isnan(res.val_mse) and np.isnan(res.train_mse) and res.loss == "cross_entropy"
    assert accuracy_score(yv, P.argmax(axis=1)) > 0.8  # Bayes accuracy of these blobs is about 0.9


def test_logistic_fit_matches_sklearn_on_separable_data():
    # Linearly separable toy set (margin 1 on both sides of a random hyperplane): scikit-learn's
    # unpenalised LogisticRegression (reference) separates it; the trainer's binary cross-entropy fit
    # must reach the same test accuracy (1.0 for both, the margin leaves no room for a test error).
    rng = np.random.default_rng(3)
    normal = rng.normal(size=D)
    normal /= np.linalg.norm(normal)

    def draw(n):
        X = rng.normal(size=(n, D))
        t = X @ normal
        X += np.sign(t)[:, None] * normal  # push every point 1 away from the hyperplane
        return X, (t > 0).astype(int)

    X, y = draw(300)
    Xt, yt = draw(400)
    ref = LogisticRegression(C=np.inf, max_iter=2000).fit(X, y)  # C=inf: no penalty
    trainer = BatchedTrainer(size_network(300, 1, 1, ambient_dim=D), config(max_steps=300), loss="cross_entropy",
                             n_outputs=2)
    trainer.fit([ReplicaTask(X, y, seed=s) for s in range(3)])
    ref_acc = accuracy_score(yt, ref.predict(Xt))
    for P in trainer.predict(Xt):
        assert accuracy_score(yt, P.argmax(axis=1)) == ref_acc == 1.0


@pytest.mark.parametrize("loss", ["cross_entropy", "policy"])
def test_replica_numbers_do_not_depend_on_the_stack(loss):
    # As for regression (tests/test_training.py): bit-for-bit the same numbers whichever replicas share a
    # stack; four together against 1 + 3 (a stack of one takes other kernels) and against 2 + 2; full
    # batch (n = 200) and minibatch (n = 600) replicas.
    spec = size_network(600, 1, 1, ambient_dim=D)
    tasks = []
    for i, n in enumerate([600, 600, 600, 600, 200, 200]):
        X, y = blobs(n + 100, seed=10 + i)
        if loss == "policy":
            rng = np.random.default_rng(i)
            y = np.eye(K)[y] + 0.3 * rng.normal(size=(n + 100, K))  # scores: the true class pays about 1
        tasks.append(ReplicaTask(X[:n], y[:n], X[n:], y[n:], seed=i))
    cfg = config(max_steps=60, min_steps=0, patience_steps=20, eval_every=10, batch_size=64)

    def run(groups):
        out = []
        for grp in groups:
            out += BatchedTrainer(spec, cfg, loss=loss, n_outputs=K).fit([tasks[i] for i in grp])
        return out

    together = run([[0, 1, 2, 3, 4, 5]])
    for split in ([[0], [1, 2, 3], [4], [5]], [[0, 1], [2, 3], [4, 5]]):
        for a, b in zip(together, run(split)):
            assert (a.steps, a.best_step, a.val_loss, a.train_loss) == (b.steps, b.best_step, b.val_loss, b.train_loss)
            for wa, wb in zip(a.state["weights"] + a.state["biases"], b.state["weights"] + b.state["biases"]):
                np.testing.assert_array_equal(wa, wb)


def test_policy_training_raises_the_value():
    # Scores pay 1 for the row's class and 0 otherwise: a trained softmax policy must earn well above the
    # uniform policy's 1/K (the Bayes policy of these blobs earns about 0.9).
    X, y = blobs(700, seed=4)
    G = np.eye(K)[y]
    trainer = BatchedTrainer(size_network(500, 2, 1, ambient_dim=D), config(max_steps=200), loss="policy", n_outputs=K)
    (res,) = trainer.fit([ReplicaTask(X[:500], G[:500], X[500:], G[500:], seed=0)])
    P = trainer.predict(X[500:], replica=0)
    value = float((P * G[500:]).sum(axis=1).mean())
    assert res.val_loss == pytest.approx(-value, rel=1e-5)
    assert value > 0.7


def test_bad_task_arguments():
    X, y = blobs(50, seed=0)
    spec = size_network(50, 1, 1, ambient_dim=D)
    with pytest.raises(ValueError, match="one of 'mse'"):
        BatchedTrainer(spec, loss="hinge")
    with pytest.raises(ValueError, match=">= 2 for loss='cross_entropy'"):
        BatchedTrainer(spec, loss="cross_entropy")
    with pytest.raises(ValueError, match="must be 1 for loss='mse'"):
        BatchedTrainer(spec, n_outputs=3)
    tr = BatchedTrainer(spec, config(max_steps=5), loss="cross_entropy", n_outputs=2)
    with pytest.raises(DataValidationError, match=r"integer class labels in \[0, 2\).*row"):
        tr.fit([ReplicaTask(X, y)])  # labels 0..2 but n_outputs=2
    with pytest.raises(DataValidationError, match="integer class labels"):
        tr.fit([ReplicaTask(X, y * 0.5)])
    with pytest.raises(DataValidationError, match="not numbers"):
        tr.fit([ReplicaTask(X, np.array(["a"] * 50))])
    pol = BatchedTrainer(spec, config(max_steps=5), loss="policy", n_outputs=K)
    with pytest.raises(DataValidationError, match=r"\(n, n_outputs\) array"):
        pol.fit([ReplicaTask(X, y.astype(float))])
    (res,) = BatchedTrainer(spec, config(max_steps=5), loss="cross_entropy", n_outputs=K).fit([ReplicaTask(X, y)])
    with pytest.raises(ValueError, match="BatchedTrainer.predict"):
        res.to_module()
