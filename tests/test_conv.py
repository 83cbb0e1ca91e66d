"""The batched residual conv trainer: the stacked forward against per-replica torch convolutions, replicas
independent of their stack, the losses against scikit-learn, the campaign learners, bad image shapes."""

import numpy as np
import pytest
import torch
from sklearn.metrics import log_loss

from manireg.curves import Campaign, CampaignSpec, LearnerSpec
from manireg.curves.sweep import prepare
from manireg.data import rendered_objects
from manireg.data.labels import make_classification
from manireg.nets.builders import build_conv_network, count_parameters
from manireg.nets.conv import BatchedConvTrainer, _build, _param_names, _stacked_init, conv_forward
from manireg.nets.training import ReplicaTask, TrainConfig
from manireg.theory.sizing import size_conv_network


@pytest.fixture(scope="module")
def images():
    c = make_classification(rendered_objects(500, 2, size=8, seed=0), n_classes=3, temperature=0.3, seed=1)
    return c.X, c.y


@pytest.mark.parametrize("shape,n", [((8, 8), 64), ((2, 9, 7), 900)])
def test_parameter_count_and_stacked_forward_match_torch_conv2d(shape, n):
    spec = size_conv_network(n, 2, 1, shape, n_outputs=3)
    nets = [_build(spec, s) for s in (3, 5, 11)]
    # closed-form parameter count against the module's own count
    assert spec.n_parameters == count_parameters(nets[0])
    params = _stacked_init(spec, [3, 5, 11])
    x = torch.randn(3, 7, *spec.input_shape, generator=torch.Generator().manual_seed(0))
    with torch.no_grad():
        # reference: each replica's module (torch.nn.Conv2d, i.e. torch.nn.functional.conv2d per replica)
        ref = torch.stack([net(x[r].reshape(7, -1)) for r, net in enumerate(nets)])
        grouped = conv_forward(spec, params, x, "grouped")
        split = conv_forward(spec, params, x, "split")
    torch.testing.assert_close(grouped, ref, rtol=1e-5, atol=1e-6)
    torch.testing.assert_close(split, ref, rtol=1e-5, atol=1e-6)


@pytest.mark.parametrize("mode", ["grouped", "split"])
@pytest.mark.parametrize("threshold", [256, 24])  # full batch (n_train = 48) / minibatches of 16 rows
def test_replica_numbers_do_not_depend_on_the_stack(images, mode, threshold):
    X, y = images
    cfg = TrainConfig(max_steps=30, min_steps=10, patience_steps=10, eval_every=5, full_batch_threshold=threshold,
                      batch_size=16)
    spec = size_conv_network(60, 2, 1, (8, 8), n_outputs=3)
    tasks = [ReplicaTask(X[60 * i:60 * i + 48], y[60 * i:60 * i + 48], X[60 * i + 48:60 * i + 60],
                         y[60 * i + 48:60 * i + 60], seed=7 + i) for i in range(3)]
    stacked = BatchedConvTrainer(spec, cfg, loss="cross_entropy", mode=mode)
    res = stacked.fit(tasks)
    P = stacked.predict(X[400:])
    for i in (0, 2):
        alone = BatchedConvTrainer(spec, cfg, loss="cross_entropy", mode=mode)
        r1 = alone.fit([tasks[i]])[0]
        assert (r1.steps, r1.best_step, r1.stop_reason) == (res[i].steps, res[i].best_step, res[i].stop_reason)
        if mode == "split":  # one conv2d per replica: the same arithmetic, bit for bit
            np.testing.assert_array_equal(alone.predict(X[400:])[0], P[i])
        else:  # the grouped kernel may block channels differently per stack height: float rounding only
            np.testing.assert_allclose(alone.predict(X[400:])[0], P[i], atol=1e-4)


def test_losses_against_sklearn_and_the_module(images):
    X, y = images
    cfg = TrainConfig(max_steps=40, min_steps=0)
    spec = size_conv_network(100, 2, 1, (1, 8, 8), n_outputs=3)
    trainer = BatchedConvTrainer(spec, cfg, loss="cross_entropy")
    tasks = [ReplicaTask(X[:100], y[:100], X[100:160], y[100:160], seed=s) for s in range(2)]
    res = trainer.fit(tasks)
    for r in range(2):
        P = trainer.predict(X[100:160], replica=r)
        # the tracked cross-entropy of the restored net equals scikit-learn's log_loss on its probabilities
        assert res[r].val_loss == pytest.approx(log_loss(y[100:160], P, labels=[0, 1, 2]), rel=1e-5)
        with torch.no_grad():
            scores = trainer.to_module(r)(torch.from_numpy(X[100:160].astype(np.float32)))
        np.testing.assert_allclose(torch.softmax(scores, -1).numpy(), P, atol=1e-5)
    # regression: the reported validation MSE is the mean squared error of the predictions (closed form)
    f = np.sin(3 * X[:, :64].mean(axis=1))
    reg = BatchedConvTrainer(size_conv_network(100, 2, 1, (8, 8)), cfg, loss="mse")
    rr = reg.fit([ReplicaTask(X[:100], f[:100], X[100:160], f[100:160], seed=1)])[0]
    pred = reg.predict(X[100:160], replica=0)
    assert rr.val_mse == pytest.approx(np.mean((pred - f[100:160]) ** 2), rel=1e-4)
    with torch.no_grad():
        np.testing.assert_allclose(reg.to_module(0)(torch.from_numpy(X[100:160].astype(np.float32))).numpy(),
                                   pred, rtol=1e-5, atol=1e-5)


def test_conv_classifier_beats_chance_on_rendered_images():
    gen = {"manifold": "rendered_objects", "n": 560, "d": 2, "size": 8, "n_classes": 3, "temperature": 0.3, "seed": 0}
    res = Campaign(generator=gen, task="classify", sizes=[60, 300], repeats=1, test_size=240,
                   learners=[LearnerSpec("conv_classifier", params={"max_steps": 150})]).run(progress=False)
    rows = res.to_frame()
    big = rows[rows.n == 300].iloc[0]
    # Chance: predicting the most frequent test class. With 240 test labels the error rate's standard
    # error is at most sqrt(0.25 / 240) = 0.032; a margin of 0.13 (4 standard errors) below chance fails
    # by luck with probability < 1e-4 when the net learns nothing.
    y_test = prepare(CampaignSpec(generator=gen, task="classify", sizes=[60, 300], repeats=1, test_size=240)).y_test
    chance = 1 - np.bincount(y_test.astype(int)).max() / len(y_test)
    assert big.test_error_rate < chance - 0.13
    assert big.excess_logistic_risk >= 0 and big.width >= 8 and big.depth >= 1


def test_bad_image_shape_is_a_clear_error(images):
    X, y = images
    gen = {"manifold": "rendered_objects", "n": 200, "d": 2, "size": 8, "n_classes": 2, "seed": 0}
    with pytest.raises(ValueError, match=r"do not match the declared image_shape \(1, 7, 8\).*64 columns"):
        Campaign(generator=gen, task="classify", sizes=[40, 80], repeats=1,
                 learners=[LearnerSpec("conv_classifier", params={"image_shape": (7, 8)})]).run(progress=False)
    with pytest.raises(ValueError, match=r"'image_shape' of LearnerSpec\('conv_net'\) must be \(H, W\)"):
        LearnerSpec("conv_net", params={"image_shape": (8, 8, 1, 1)})
    rng = np.random.default_rng(0)
    with pytest.raises(ValueError, match=r"not a square number of pixels; declare the image shape"):
        Campaign(X=rng.normal(size=(200, 60)), y=rng.normal(size=200), dimension=2, sizes=[40, 80], repeats=1,
                 learners=["conv_net"]).run(progress=False)
    trainer = BatchedConvTrainer(size_conv_network(60, 2, 1, (6, 6), n_outputs=3), loss="cross_entropy")
    with pytest.raises(ValueError, match=r"declared image_shape \(1, 6, 6\).*64 columns"):
        trainer.fit([ReplicaTask(X[:60], y[:60], seed=0)])


def test_conv_net_regression_rows():
    gen = {"manifold": "rendered_objects", "n": 200, "d": 2, "size": 8, "smoothness": 1.0, "noise_std": 0.1, "seed": 0}
    rows = Campaign(generator=gen, sizes=[40, 80], repeats=1, test_size=60,
                    learners=[LearnerSpec("conv_net", params={"max_steps": 20, "min_steps": 0})]).run(progress=False).rows
    assert len(rows) == 2 and rows.test_mse.notna().all() and (rows.test_mse > 0).all()
    # rows name the conv shape: channels in width, residual blocks in depth
    assert (rows.width >= 8).all() and (rows.depth >= 1).all() and set(rows.learner) == {"conv_net"}
