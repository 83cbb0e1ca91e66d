"""Batched trainer: determinism, quality against scikit-learn, small-n behaviour, bounds, bad input."""

import numpy as np
import pytest
import torch
from sklearn.neural_network import MLPRegressor
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from manireg._validation import DataValidationError
from manireg.nets import BatchedTrainer, NetworkRegressor, ReplicaTask, TrainConfig, count_nonzero_weights, lr_at_step
from manireg.theory import SizingConstants, size_network

D = 10


def config(**kw):
    """TrainConfig with one torch thread: the test machine is shared, and small nets gain nothing from more."""
    kw.setdefault("n_threads", 1)
    return TrainConfig(**kw)


def circle_data(n, seed, noise=0.05):
    """Unit circle in R^10 through a fixed random rotation; target sin(2t) + 0.5 cos(t) (smooth)."""
    Q, _ = np.linalg.qr(np.random.default_rng(1234).normal(size=(D, D)))
    rng = np.random.default_rng(seed)
    t = rng.uniform(0, 2 * np.pi, n)
    P = np.zeros((n, D))
    P[:, 0], P[:, 1] = np.cos(t), np.sin(t)
    f = np.sin(2 * t) + 0.5 * np.cos(t)
    return P @ Q.T, f + noise * rng.normal(size=n), f


def make_tasks(ns, seeds, n_val=200):
    tasks = []
    for n, s in zip(ns, seeds):
        X, y, _ = circle_data(n + n_val, seed=100 + s)
        tasks.append(ReplicaTask(X[:n], y[:n], X[n:], y[n:], seed=s))
    return tasks


def test_batched_equals_one_at_a_time():
    # Mixed n: two full-batch replicas (padded together) and two minibatch replicas.
    spec = size_network(600, 1, 1, ambient_dim=D, output_bound=2.0)
    cfg = config(max_steps=300, min_steps=0, patience_steps=100, eval_every=20, full_batch_threshold=256,
                      batch_size=64)
    tasks = make_tasks([150, 250, 600, 900], seeds=[0, 1, 2, 3])
    together = BatchedTrainer(spec, cfg)
    res = together.fit(tasks)
    X_test, _, _ = circle_data(100, seed=999)
    pred_all = together.predict(X_test)
    assert pred_all.shape == (4, 100)
    for i, task in enumerate(tasks):
        alone = BatchedTrainer(spec, cfg)
        (r,) = alone.fit([task])
        assert r.steps == res[i].steps and r.best_step == res[i].best_step
        assert r.stop_reason == res[i].stop_reason
        assert r.val_mse == pytest.approx(res[i].val_mse, rel=1e-4, abs=1e-6)
        np.testing.assert_allclose(alone.predict(X_test, replica=0), pred_all[i], rtol=1e-4, atol=1e-5)
    # different seeds give different networks
    assert np.abs(pred_all[2] - pred_all[3]).max() > 1e-4


def test_seed_determinism_and_module_export():
    spec = size_network(300, 1, 1, ambient_dim=D)
    cfg = config(max_steps=100)
    tasks = make_tasks([300], seeds=[7])
    a, b = BatchedTrainer(spec, cfg), BatchedTrainer(spec, cfg)
    ra, rb = a.fit(tasks)[0], b.fit(tasks)[0]
    assert ra.val_mse == rb.val_mse
    X_test, _, _ = circle_data(50, seed=5)
    net = ra.to_module()
    with torch.no_grad():
        out = net(torch.tensor(X_test, dtype=torch.float32)).numpy()
    np.testing.assert_allclose(out, a.predict(X_test, replica=0), rtol=1e-5, atol=1e-6)
    d = ra.to_dict()
    assert "state" not in d and d["stop_reason"] in {"patience", "step_cap", "time_cap"}


def test_not_worse_than_sklearn_on_circle():
    # Reference learner: scikit-learn MLPRegressor (Adam, its own early stopping), same hidden sizes, same
    # standardised inputs. Margin: our test MSE <= 1.5 x sklearn's + 0.005 (noise variance is 0.0025).
    n = 1000
    X, y, _ = circle_data(n, seed=1)
    Xt, _, ft = circle_data(2000, seed=2, noise=0.0)
    spec = size_network(int(0.8 * n), 1, 1, ambient_dim=D)
    ours = NetworkRegressor(dimension=1, smoothness=1, max_steps=1500, n_threads=1, random_state=0).fit(X, y)
    mse_ours = float(np.mean((ours.predict(Xt) - ft) ** 2))
    skl = make_pipeline(
        StandardScaler(),
        MLPRegressor(hidden_layer_sizes=spec.hidden_sizes, learning_rate_init=3e-3, early_stopping=True,
                     max_iter=300, random_state=0),
    ).fit(X, y)
    mse_skl = float(np.mean((skl.predict(Xt) - ft) ** 2))
    assert ours.spec_.hidden_sizes == spec.hidden_sizes
    assert mse_ours <= 1.5 * mse_skl + 0.005, (mse_ours, mse_skl)


def test_small_n_rough_target_does_not_collapse():
    # Rough target: sum of |t - c|^0.5 bumps (Hölder 1/2) on the circle, n = 256, 4 replicas.
    def rough(n, seed):
        X, _, _ = circle_data(n, seed=seed, noise=0.0)
        Q, _ = np.linalg.qr(np.random.default_rng(1234).normal(size=(D, D)))
        P = X @ Q
        t = np.arctan2(P[:, 1], P[:, 0])
        y = sum(np.abs(t - c) ** 0.5 for c in (-2.0, 0.0, 1.5))
        return X, y
    tasks = []
    for s in range(4):
        X, y = rough(256 + 64, seed=20 + s)
        tasks.append(ReplicaTask(X[:256], y[:256], X[256:], y[256:], seed=s))
    spec = size_network(256, 1, 0.5, ambient_dim=D)
    res = BatchedTrainer(spec, config(max_steps=800)).fit(tasks)
    for r, task in zip(res, tasks):
        mean_mse = float(np.mean((task.y_val - task.y_train.mean()) ** 2))
        assert r.val_mse < 0.25 * mean_mse, (r.val_mse, mean_mse)
        assert r.train_mse < 0.25 * float(np.var(task.y_train))


def test_projection_and_pruning_in_trainer():
    spec = size_network(500, 1, 1, ambient_dim=D, output_bound=1.0).replace(weight_bound=0.3, nonzero_budget=200)
    cfg = config(max_steps=200, min_steps=0, patience_steps=50, project_weights=True, prune=True, prune_at=0.5)
    trainer = BatchedTrainer(spec, cfg)
    res = trainer.fit(make_tasks([500, 300], seeds=[0, 1]))
    for r in res:
        assert r.nonzero_weights <= 200
        assert r.steps > 100  # no patience stop before the prune step
        assert max(float(np.abs(W).max()) for W in r.state["weights"]) <= 0.3 * (1 + 1e-6)
        net = r.to_module()
        assert count_nonzero_weights(net) <= 200
    X_test, _, _ = circle_data(300, seed=3)
    assert np.abs(trainer.predict(X_test)).max() <= 1.0


def test_stop_reasons_and_late_best():
    spec = size_network(300, 1, 1, ambient_dim=D)
    (r,) = BatchedTrainer(spec, config(max_steps=60, eval_every=10)).fit(make_tasks([300], [0]))
    assert r.stop_reason == "step_cap" and r.steps == 60
    assert r.late_best == (r.best_step >= 48)
    # patience off, so only the 0.2 s cap can stop it (a 300-row fit is done in under 300 steps otherwise)
    (r,) = BatchedTrainer(spec, config(max_steps=10**6, patience_steps=10**6, max_seconds=0.2)).fit(
        make_tasks([300], [0]))
    assert r.stop_reason == "time_cap"
    # patience: a pure-noise target (independent of X) stops improving after the first evaluations
    X, _, _ = circle_data(300, seed=0)
    noise = np.random.default_rng(0).normal(size=300)
    task = ReplicaTask(X[:200], noise[:200], X[200:], noise[200:], seed=0)
    (r,) = BatchedTrainer(spec, config(max_steps=3000, min_steps=0, patience_steps=100, eval_every=10)).fit([task])
    assert r.stop_reason == "patience" and r.steps < 3000


def test_schedule():
    cfg = config(learning_rate=1.0, max_steps=100, final_lr_fraction=0.0)
    assert lr_at_step(cfg, 0) == pytest.approx(1.0) and lr_at_step(cfg, 50) == pytest.approx(0.5)
    assert lr_at_step(cfg, 100) == pytest.approx(0.0, abs=1e-12)
    step = config(learning_rate=1.0, max_steps=100, schedule="step")
    assert [lr_at_step(step, t) for t in (0, 60, 80)] == pytest.approx([1.0, 0.1, 0.01])


def test_regressor_sklearn_contract():
    from sklearn.base import clone

    reg = NetworkRegressor(dimension=1, max_steps=50, n_threads=1, random_state=0)
    assert clone(reg).get_params()["max_steps"] == 50
    X, y, _ = circle_data(200, seed=0)
    reg.fit(X, y)
    assert reg.predict(X).shape == (200,) and reg.n_features_in_ == D
    assert reg.result_.n_parameters == reg.spec_.n_parameters
    assert np.abs(reg.predict(X)).max() <= 1.1 * np.abs(y).max() + 1e-6


def test_bad_inputs():
    spec = size_network(300, 1, 1, ambient_dim=D)
    X, y, _ = circle_data(300, seed=0)
    Xn = X.copy()
    Xn[3, 2] = np.nan
    with pytest.raises(ValueError, match=r"tasks\[0\]\.X_train has 1 non-finite value"):
        BatchedTrainer(spec).fit([ReplicaTask(Xn, y, seed=0)])
    with pytest.raises(DataValidationError, match=r"NetworkRegressor: X has 1 non-finite value"):
        NetworkRegressor(dimension=1).fit(Xn, y)
    with pytest.raises(ValueError, match=r"X_train has 3 columns but spec.input_dim is 10"):
        BatchedTrainer(spec).fit([ReplicaTask(X[:, :3], y, seed=0)])
    with pytest.raises(ValueError, match=r"'d' parameter of size_network must be <= ambient_dim=10"):
        NetworkRegressor(dimension=20).fit(X, y)
    with pytest.raises(ValueError, match=r"'s' parameter of regression_exponent must be a finite real > 0"):
        NetworkRegressor(dimension=1, smoothness=0).fit(X, y)
    with pytest.raises(ValueError, match=r"NetworkRegressor: X has 2 row\(s\); at least 3 are needed"):
        NetworkRegressor(dimension=1).fit(X[:2], y[:2])
    with pytest.raises(ValueError, match=r"'patience_steps' parameter of TrainConfig must be an int >= 1"):
        config(patience_steps=0)
    with pytest.raises(ValueError, match=r"'schedule' parameter of TrainConfig must be one of"):
        config(schedule="linear")
    with pytest.raises(ValueError, match=r"'tasks' parameter of BatchedTrainer.fit must hold at least one"):
        BatchedTrainer(spec).fit([])
    with pytest.raises(RuntimeError, match=r"call fit\(tasks\) first"):
        BatchedTrainer(spec).predict(X)


def test_hand_written_gradients_and_fused_adam_match_autograd_and_torch_adam():
    # The trainer's backward pass is written out by hand and its update is torch.optim's functional fused
    # Adam on per-replica slabs; check both against autograd and torch.optim.Adam (reference
    # implementation, its default single-tensor path) on a random stacked net.
    from manireg.nets.training import _loss_grads, _replica_slabs, adam_update

    g = torch.Generator().manual_seed(0)
    R, B, sizes = 3, 17, [D, 12, 12, 1]
    Ws = [torch.randn(R, a, b, generator=g) / a**0.5 for a, b in zip(sizes[:-1], sizes[1:])]
    bs = [0.1 * torch.randn(R, 1, b, generator=g) for b in sizes[1:]]
    x, y = torch.randn(R, B, D, generator=g), torch.randn(R, B, generator=g)
    w = torch.rand(R, B, generator=g)
    params = [p.clone().requires_grad_(True) for p in Ws + bs]
    h = x
    for i in range(len(Ws)):
        h = torch.baddbmm(params[len(Ws) + i], h, params[i])
        if i < len(Ws) - 1:
            h = torch.relu(h)
    loss = ((h.squeeze(-1) - y) ** 2 * w).sum()
    ref = torch.autograd.grad(loss, params)
    for weights in (w, 1.0 / B):
        mine = _loss_grads(Ws, bs, x, y, weights)
        if not isinstance(weights, float):
            for a, b in zip(mine, ref):
                torch.testing.assert_close(a, b, rtol=1e-5, atol=1e-6)
    # three fused Adam steps on per-replica slabs (as the trainer calls it), on the private kernel and on
    # the public fallback, equal torch.optim.Adam's; the two paths agree bit for bit (one kernel)
    ends = []
    for private in (True, False):
        p_fused = [p.detach().clone() for p in params]
        m1 = [torch.zeros_like(p) for p in p_fused]
        m2 = [torch.zeros_like(p) for p in p_fused]
        p_sl, g_sl, m1_sl, m2_sl = _replica_slabs(p_fused, list(ref), m1, m2)
        p_ref = [p.detach().clone().requires_grad_(True) for p in params]
        opt = torch.optim.Adam(p_ref, lr=3e-3, foreach=False)
        for t in range(3):
            adam_update(p_sl, g_sl, m1_sl, m2_sl, t + 1, lr=3e-3, beta1=0.9, beta2=0.999, eps=1e-8, private=private)
            for p, gr in zip(p_ref, ref):
                p.grad = gr.clone()
            opt.step()
        for a, b in zip(p_fused, p_ref):
            torch.testing.assert_close(a, b.detach(), rtol=1e-5, atol=1e-6)
        ends.append(p_fused)
    for a, b in zip(*ends):
        assert torch.equal(a, b)


def test_adam_falls_back_to_the_public_path(monkeypatch):
    # A torch whose private kernel is gone or refuses the call must still train, on the public path.
    from manireg.nets import training

    def refuses(*args, **kwargs):
        raise TypeError("unexpected keyword argument")

    spec = size_network(300, 1, 1, ambient_dim=D)
    tasks = make_tasks([300, 300], seeds=[0, 1])
    cfg = config(max_steps=30, min_steps=0, eval_every=10)
    reference = BatchedTrainer(spec, cfg).fit(tasks)
    # (the public path itself calls the kernel, so the private lookup is what is replaced)
    monkeypatch.setitem(training._PRIVATE, "disabled", False)
    monkeypatch.setattr(training, "_private_fused_adam",
                        lambda: None if training._PRIVATE["disabled"] else refuses)
    refused = BatchedTrainer(spec, cfg).fit(tasks)
    assert training._PRIVATE["disabled"]  # switched for the rest of the process
    monkeypatch.setattr(training, "_private_fused_adam", lambda: None)  # a torch without the kernel
    absent = BatchedTrainer(spec, cfg).fit(tasks)
    for a, b, c in zip(reference, refused, absent):
        assert a.val_mse == b.val_mse == c.val_mse and a.steps == b.steps == c.steps


def test_native_bfloat16_uses_public_checks(monkeypatch):
    # bfloat16 runs in hardware only with AVX512-BF16 or AMX (Intel's instruction set reference, from
    # memory): an AVX2 CPU is never "native", an AVX512 one only with the flag.
    from manireg.nets import training

    monkeypatch.setattr(torch.backends.cpu, "get_cpu_capability", lambda: "AVX2")
    monkeypatch.setattr(training, "_cpu_flags", lambda: frozenset({"avx2", "avx512_bf16"}))
    assert not training.native_bfloat16()
    monkeypatch.setattr(torch.backends.cpu, "get_cpu_capability", lambda: "AVX512")
    assert training.native_bfloat16()
    monkeypatch.setattr(training, "_cpu_flags", lambda: frozenset({"avx2", "avx512f"}))
    assert not training.native_bfloat16()
    monkeypatch.setattr(training, "_cpu_flags", lambda: frozenset({"amx_bf16", "amx_tile"}))
    assert training.native_bfloat16()


def test_replica_numbers_do_not_depend_on_the_stack():
    # Work units may be split over workers (manireg.curves.execution.make_units), which is only sound if a
    # replica's numbers are bit-for-bit the same whichever replicas share its stack. Minibatch replicas
    # of one n, both arithmetics, four together against two plus two.
    spec = size_network(600, 1, 1, ambient_dim=D)
    tasks = make_tasks([600] * 4, seeds=[0, 1, 2, 3])
    for precision in ("float32", "bfloat16"):
        cfg = config(max_steps=60, min_steps=0, patience_steps=20, eval_every=10, batch_size=64, precision=precision)
        together = BatchedTrainer(spec, cfg).fit(tasks)
        apart = BatchedTrainer(spec, cfg).fit(tasks[:2]) + BatchedTrainer(spec, cfg).fit(tasks[2:])
        for a, b in zip(together, apart):
            assert a.precision == b.precision == precision
            assert (a.steps, a.best_step, a.val_mse, a.train_mse) == (b.steps, b.best_step, b.val_mse, b.train_mse)
            for wa, wb in zip(a.state["weights"] + a.state["biases"], b.state["weights"] + b.state["biases"]):
                np.testing.assert_array_equal(wa, wb)


def test_bfloat16_gradients_follow_float32():
    # Mixed precision only rounds the hidden-to-hidden products; the first and last layers and the loss
    # stay float32. Against the float32 gradient (itself checked against autograd above): the last
    # layer's gradient agrees to bfloat16 rounding, the whole gradient points the same way. A wrong cast
    # or a dropped layer breaks either check.
    from manireg.nets.training import _loss_grads

    g = torch.Generator().manual_seed(1)
    R, B, sizes = 2, 64, [D, 48, 48, 48, 1]
    Ws = [torch.randn(R, a, b, generator=g) * (2.0 / a) ** 0.5 for a, b in zip(sizes[:-1], sizes[1:])]
    bs = [0.1 * torch.randn(R, 1, b, generator=g) for b in sizes[1:]]
    x, y = torch.randn(R, B, D, generator=g), torch.randn(R, B, generator=g)
    full = _loss_grads(Ws, bs, x, y, 1.0 / B)
    low = _loss_grads(Ws, bs, x, y, 1.0 / B, low=torch.bfloat16)
    assert all(t.dtype == torch.float32 for t in low)
    last = len(Ws) - 1
    # bfloat16 keeps 8 significant bits: relative rounding 2^-8 ~ 0.4 % per product (IEEE-style format
    # definition); the last layer sees one rounded activation per row.
    assert float((low[last] - full[last]).norm() / full[last].norm()) < 0.02
    flat_f = torch.cat([t.reshape(R, -1) for t in full], dim=1)
    flat_l = torch.cat([t.reshape(R, -1) for t in low], dim=1)
    cosine = torch.nn.functional.cosine_similarity(flat_f, flat_l, dim=1)
    assert float(cosine.min()) > 0.98
    # and the float32 path ignores the flag it was not given
    torch.testing.assert_close(_loss_grads(Ws, bs, x, y, 1.0 / B, low=None)[0], full[0], rtol=0, atol=0)


def test_bfloat16_training_reaches_float32_error():
    # The returned network is the float32 master weights; train/val MSE are float32 evaluations of it.
    spec = size_network(800, 1, 1, ambient_dim=D)
    tasks = make_tasks([800, 800], seeds=[0, 1])
    X_test, _, f_test = circle_data(500, seed=77)
    mse = {}
    for precision in ("float32", "bfloat16"):
        trainer = BatchedTrainer(spec, config(max_steps=400, precision=precision))
        res = trainer.fit(tasks)
        assert [r.precision for r in res] == [precision] * 2
        for i, (r, t) in enumerate(zip(res, tasks)):
            pred_val = trainer.predict(t.X_val, replica=i)
            assert r.val_mse == pytest.approx(float(np.mean((pred_val - t.y_val) ** 2)), rel=1e-5)
        mse[precision] = float(np.mean((trainer.predict(X_test) - f_test) ** 2))
    # noise variance is 0.0025; both fits are well below it, and bfloat16 costs at most 25 % in error
    assert mse["float32"] < 0.0025 and mse["bfloat16"] < 1.25 * mse["float32"] + 1e-4, mse


def test_precision_choice():
    from manireg.nets.training import BF16_MIN_FLOPS, native_bfloat16, resolve_precision

    big = size_network(8192, 3, 1, ambient_dim=64)
    small = size_network(100, 1, 1, ambient_dim=3)
    shallow = size_network(8192, 3, 1, ambient_dim=64, constants=SizingConstants(depth_min=1, depth_max=1))
    assert 6.0 * big.n_parameters * 128 >= BF16_MIN_FLOPS > 6.0 * small.n_parameters * 80
    auto = TrainConfig()
    assert resolve_precision(auto, big, 128) == ("bfloat16" if native_bfloat16() else "float32")
    assert resolve_precision(auto, small, 80) == "float32"
    assert resolve_precision(auto, shallow, 128) == "float32"  # no hidden-to-hidden layer to round
    assert resolve_precision(TrainConfig(precision="float32"), big, 128) == "float32"
    assert resolve_precision(TrainConfig(precision="bfloat16"), small, 80) == "bfloat16"
    with pytest.raises(ValueError, match="precision"):
        TrainConfig(precision="half")


def test_fit_takes_an_iterator_and_frees_each_tasks_rows_once_prepared(monkeypatch):
    """Memory at scale: tasks made one at a time by a generator are not kept (their float64 rows can go once
    the trainer holds its float32 copy), the results equal those of a list, and the reported train/val MSE,
    evaluated a block of rows at a time, is the plain mean of squared errors of the restored network."""
    import weakref

    import manireg.nets.training as tr

    spec = size_network(300, 1, 1, ambient_dim=D, output_bound=2.0)
    cfg = config(max_steps=60, min_steps=0, eval_every=20, full_batch_threshold=128, batch_size=32)
    listed = BatchedTrainer(spec, cfg).fit(make_tasks([100, 300], seeds=[0, 1]))
    refs = []

    def made():
        for t in make_tasks([100, 300], seeds=[0, 1]):
            refs.append(weakref.ref(t.X_train))
            yield t

    monkeypatch.setattr(tr, "_EVAL_ROWS", 7)  # many blocks per evaluation
    trainer = BatchedTrainer(spec, cfg)
    streamed = trainer.fit(made())
    assert len(refs) == 2 and all(r() is None for r in refs)  # nothing kept the float64 rows
    for a, b in zip(listed, streamed):
        assert (a.steps, a.best_step) == (b.steps, b.best_step)
        np.testing.assert_array_equal(a.state["weights"][0], b.state["weights"][0])
    # the MSE by blocks against numpy's mean of the squared errors of predict() (float32 network, so 1e-5)
    for i, t in enumerate(make_tasks([100, 300], seeds=[0, 1])):
        pred_tr, pred_va = trainer.predict(t.X_train, replica=i), trainer.predict(t.X_val, replica=i)
        assert streamed[i].train_mse == pytest.approx(np.mean((pred_tr - t.y_train) ** 2), rel=1e-5)
        if streamed[i].precision == "float32":  # the tracked validation MSE is then the float32 pass
            assert streamed[i].val_mse == pytest.approx(np.mean((pred_va - t.y_val) ** 2), rel=1e-5)
    with pytest.raises(ValueError, match="at least one ReplicaTask"):
        BatchedTrainer(spec, cfg).fit(iter([]))


def test_gradients_written_into_a_buffer_equal_fresh_ones():
    # The trainer lets _loss_grads write into views of one preallocated (R, P) buffer; the numbers must be
    # the ones it returns without the buffer (themselves checked against autograd above), in both
    # arithmetics and for K > 1 outputs: a missed layer, a wrong view or a stale buffer would show. torch
    # runs a product into a strided view as one GEMM per replica rather than its batched GEMM, which may
    # round differently: float32 rounding tolerance (common practice), the bias sums bit for bit (one kernel).
    from manireg.nets.training import _ROW_ALIGN, _flatten, _loss_grads, _unflatten

    g = torch.Generator().manual_seed(2)
    R, B = 3, 40
    for sizes, loss, low in (([D, 24, 24, 24, 1], "mse", None), ([D, 24, 24, 24, 1], "mse", torch.bfloat16),
                             ([D, 16, 16, 3], "cross_entropy", None)):
        Ws = [torch.randn(R, a, b, generator=g) / a**0.5 for a, b in zip(sizes[:-1], sizes[1:])]
        bs = [0.1 * torch.randn(R, 1, b, generator=g) for b in sizes[1:]]
        x = torch.randn(R, B, D, generator=g)
        K = sizes[-1]
        y = (torch.randn(R, B, generator=g) if K == 1
             else torch.nn.functional.one_hot(torch.randint(0, K, (R, B), generator=g), K).float())
        fresh = _loss_grads(Ws, bs, x, y, 1.0 / B, low, loss)
        buf = torch.zeros_like(_flatten(Ws + bs, _ROW_ALIGN))
        assert buf.shape[1] % _ROW_ALIGN == 0
        views = _unflatten(buf, [tuple(t.shape[1:]) for t in Ws + bs])
        buf.fill_(float("nan"))  # every entry must be written (a stale buffer would keep its NaNs)
        written = _loss_grads(Ws, bs, x, y, 1.0 / B, low, loss, out=views)
        L = len(Ws)
        for i, (a, b, v) in enumerate(zip(fresh, written, views)):
            assert b.data_ptr() == v.data_ptr()
            if i >= L:
                assert torch.equal(a, v)
            else:
                torch.testing.assert_close(v, a, rtol=1e-5, atol=1e-7)
        n_used = sum(t[0].numel() for t in views)
        assert bool(torch.isnan(buf[:, n_used:]).all())  # the row padding is not written
