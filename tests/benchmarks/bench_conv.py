"""Benchmark: the batched residual conv trainer vs a one-at-a-time plain PyTorch loop over the same replicas.

Run as a script (pytest does not collect it):

    python tests/benchmarks/bench_conv.py            # n = 64 .. 1024, 5 replicas per n
    python tests/benchmarks/bench_conv.py --quick    # n = 64 .. 512, 3 replicas per n, 200 steps
    python tests/benchmarks/bench_conv.py --modes    # one training step: grouped conv2d, per-replica conv2d, vmap

Data: 3 classes on the rendered pebble images (``rendered_objects``, d = 2, 12 x 12 pixels) with softmax
temperature 0.3; test error rate on 400 held-out images. At each n, R replicas (each its own nested rows
and seed) are trained by ``BatchedConvTrainer`` (``mode="auto"``) in one call, and by a plain loop: for
each replica a ``build_conv_network`` module with the same initial weights, ``torch.optim.Adam``, the same
learning-rate schedule, batch size, full-batch threshold, step cap, evaluation cadence, patience and
validation rows (same budget). Both run with one torch thread. The machine may be shared: the load average
is printed beside the timings; "ratio" is of wall-clock seconds, "cpu ratio" of the process's CPU seconds
(one thread, so CPU time is the work done and is less disturbed by other processes than wall time).
"""

from __future__ import annotations

import argparse
import copy
import os
import time

import numpy as np


def make_data(n_total, size=12, seed=0):
    from manireg.data import rendered_objects
    from manireg.data.labels import make_classification

    c = make_classification(rendered_objects(n_total, 2, size=size, seed=seed), n_classes=3, temperature=0.3,
                            seed=seed + 1)
    return c.X, c.y


def plain_loop(spec, cfg, task):
    """One replica the plain PyTorch way: module, torch.optim.Adam, same schedule and early stopping."""
    import torch

    from manireg._random import derive_seed
    from manireg.nets.builders import build_conv_network
    from manireg.nets.conv import _Prepared
    from manireg.nets.training import lr_at_step

    p = _Prepared(task, 0, cfg, spec.input_shape, "plain loop", "cross_entropy", spec.n_outputs)
    net = build_conv_network(spec.head, spec.input_shape, seed=derive_seed(p.seed, 0), channels=spec.channels,
                             n_blocks=spec.n_blocks, n_outputs=spec.n_outputs)
    opt = torch.optim.Adam(net.parameters(), lr=cfg.learning_rate, betas=(cfg.beta1, cfg.beta2), eps=cfg.adam_eps)
    gen = torch.Generator()
    gen.manual_seed(derive_seed(p.seed, 1))
    labels, labels_val = p.y.argmax(dim=1), p.yv.argmax(dim=1)
    best, best_val, best_step, perm = None, float("inf"), 0, torch.empty(0, dtype=torch.int64)
    step = 0
    while True:
        if step % cfg.eval_every == 0 or step == cfg.max_steps:
            with torch.no_grad():
                v = float(torch.nn.functional.cross_entropy(net(p.Xv), labels_val))
            if v < best_val * (1 - cfg.tol):
                best_val, best_step, best = v, step, copy.deepcopy(net.state_dict())
            if step >= cfg.max_steps or (step >= cfg.min_steps and step - best_step >= cfg.patience_steps):
                break
        if p.full:
            xb, yb = p.X, labels
        else:
            while perm.numel() < p.batch:
                perm = torch.cat([perm, torch.randperm(p.n, generator=gen)])
            ix, perm = perm[:p.batch], perm[p.batch:]
            xb, yb = p.X[ix], labels[ix]
        for group in opt.param_groups:
            group["lr"] = lr_at_step(cfg, step)
        opt.zero_grad()
        torch.nn.functional.cross_entropy(net(xb), yb).backward()
        opt.step()
        step += 1
    net.load_state_dict(best)
    return net, p


def run_grid(sizes, R, steps, n_test=400, size=12):
    import torch

    from manireg._threads import torch_threads
    from manireg.nets.conv import BatchedConvTrainer
    from manireg.nets.training import ReplicaTask, TrainConfig
    from manireg.theory.sizing import size_conv_network

    X, y = make_data(max(sizes) + n_test + R * 50, size=size)
    Xte, yte = X[-n_test:], y[-n_test:]
    cfg = TrainConfig(max_steps=steps, min_steps=min(200, steps // 2), n_threads=1)
    print(f"{'n':>6} {'R':>3} {'chan':>5} {'mode':>8} {'batched s':>10} {'loop s':>8} {'ratio':>6} {'cpu ratio':>9} "
          f"{'err batched':>12} {'err loop':>9}  load avg (1, 5, 15 min)")
    for n in sizes:
        n_val = max(1, round(0.2 * n))
        tasks = []
        for r in range(R):
            rows = np.random.default_rng(100 + r).permutation(len(X) - n_test)[:n]
            tasks.append(ReplicaTask(X[rows[n_val:]], y[rows[n_val:]], X[rows[:n_val]], y[rows[:n_val]], seed=r))
        spec = size_conv_network(n, 2, 1, (size, size), n_outputs=3)
        trainer = BatchedConvTrainer(spec, cfg, loss="cross_entropy")
        t, c = time.perf_counter(), time.process_time()
        trainer.fit(tasks)
        tb, cb = time.perf_counter() - t, time.process_time() - c
        err_b = np.mean([(trainer.predict(Xte, replica=r).argmax(1) != yte).mean() for r in range(R)])
        t, c = time.perf_counter(), time.process_time()
        errs = []
        with torch_threads(1):
            for task in tasks:
                net, p = plain_loop(spec, cfg, task)
                with torch.no_grad():
                    xs = torch.from_numpy(((Xte - p.x_mean) / p.x_std).astype(np.float32))
                    errs.append(float((net(xs).argmax(1).numpy() != yte).mean()))
        tl, cl = time.perf_counter() - t, time.process_time() - c
        mode = trainer._group_mode(tasks[0].X_train.shape[0] if len(tasks[0].X_train) <= cfg.full_batch_threshold
                                   else cfg.batch_size)
        load = ", ".join(f"{v:.1f}" for v in os.getloadavg())
        print(f"{n:>6} {R:>3} {spec.channels:>5} {mode:>8} {tb:>10.1f} {tl:>8.1f} {tl / tb:>6.2f} {cl / cb:>9.2f} {err_b:>12.3f} "
              f"{np.mean(errs):>9.3f}  ({load})", flush=True)


def step_modes(sizes, R, size=12):
    """Time one training step (forward, backward) of R replicas: grouped conv2d, per-replica conv2d, vmap."""
    import torch
    from torch.func import functional_call, vmap

    from manireg.nets.conv import _build, _param_names, _stacked_init, conv_forward
    from manireg.nets.training import TrainConfig
    from manireg.theory.sizing import size_conv_network

    torch.set_num_threads(1)
    cfg = TrainConfig()
    print(f"{'n':>6} {'B':>4} {'chan':>5} {'grouped ms':>11} {'split ms':>9} {'vmap ms':>8} {'loop ms':>8}  load avg")
    for n in sizes:
        n_fit = n - round(0.2 * n)
        B = n_fit if n_fit <= cfg.full_batch_threshold else cfg.batch_size
        spec = size_conv_network(n, 2, 1, (size, size), n_outputs=3)
        params = [p.requires_grad_(True) for p in _stacked_init(spec, list(range(R)))]
        x = torch.randn(R, B, 1, size, size)
        nets = [_build(spec, s) for s in range(R)]
        names = _param_names(spec)

        def timed(fn, k=5):
            fn()
            t = time.perf_counter()
            for _ in range(k):
                fn()
            return (time.perf_counter() - t) / k * 1e3

        def stacked(mode):
            z = conv_forward(spec, params, x, mode)
            torch.autograd.grad(z.square().sum(), params)

        def vmapped():
            z = vmap(lambda ps, xx: functional_call(nets[0], dict(zip(names, ps)), (xx.reshape(B, -1),)))(params, x)
            torch.autograd.grad(z.square().sum(), params)

        def loop():
            for r, net in enumerate(nets):
                torch.autograd.grad(net(x[r].reshape(B, -1)).square().sum(), list(net.parameters()))

        g, s, v, lo = timed(lambda: stacked("grouped")), timed(lambda: stacked("split")), timed(vmapped), timed(loop)
        load = ", ".join(f"{a:.1f}" for a in os.getloadavg())
        print(f"{n:>6} {B:>4} {spec.channels:>5} {g:>11.1f} {s:>9.1f} {v:>8.1f} {lo:>8.1f}  ({load})", flush=True)


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--modes", action="store_true")
    args = ap.parse_args()
    sizes = [64, 128, 256, 512] if args.quick else [64, 128, 256, 512, 1024]
    R = 3 if args.quick else 5
    print(f"load average at start: {os.getloadavg()} (the machine may be shared; timings under load are noisy)")
    if args.modes:
        step_modes(sizes, 5)
    else:
        run_grid(sizes, R, 200 if args.quick else 500)


if __name__ == "__main__":
    main()
