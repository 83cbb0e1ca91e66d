"""Benchmark: batched trainer vs torch.func's vmap ensemble vs one-at-a-time PyTorch vs scikit-learn's MLPRegressor.

Run as a script (pytest does not collect it):

    python tests/benchmarks/bench_training.py            # n = 256 .. 8192, 5 repeats
    python tests/benchmarks/bench_training.py --quick    # n = 256 .. 2048, 3 repeats
    python tests/benchmarks/bench_training.py --precision bfloat16   # the batched side in mixed precision
    python tests/benchmarks/bench_training.py --crossover            # float32 vs bfloat16 step times
    python tests/benchmarks/bench_training.py --floor                # how low each arithmetic gets
    python tests/benchmarks/bench_training.py --adam                 # public vs private fused Adam step
    python tests/benchmarks/bench_training.py --against REV --quick  # the trainer of git revision REV vs this one
    python tests/benchmarks/bench_training.py --steps --quick        # one step vs torch.mm, short rounds
    python tests/benchmarks/bench_training.py --steps --against REV  # the same, REV's step beside this one's

Data: a 2-sphere in R^3 placed in R^64 by a random rotation, target sin(2 x1) + x2 x3 + noise (sd 0.1),
test MSE against the noise-free target on 2000 points. All three learners get the same hidden sizes
(``size_network(n_train, d=2, s=1, ambient_dim=64)``), batch size, learning rate and validation split; the
batched trainer and the one-at-a-time PyTorch loop run the default ``TrainConfig`` and the same torch
thread policy (``manireg.nets.training.auto_threads``: one thread for a step under 2e8 flops, else
torch's setting).

The comparison runs the batched trainer in float32 by default (``--precision``), so the ratio to the
one-at-a-time loop measures batching alone. ``--crossover`` instead times one optimiser step (forward,
backward, fused Adam; 5 replicas, one thread) in float32 and in bfloat16 mixed precision for the nets of
the standard campaign (d = 3, D = 64, n = 256 .. 8192) and for narrower ones, with each step's flop count:
the data behind ``manireg.nets.training.BF16_MIN_FLOPS``. ``--floor`` trains 3 replicas of a wide net
(n = 4096, width multiplier 4) on a noise-free target on a circle in R^10 (d = 1, an easy target) for 500
and 2000 steps in each arithmetic and prints the test MSE relative to the target's variance: how far down
each can go.

Four learners on the same data, sizes, budget and early-stopping rule: the batched trainer; torch.func's
documented ensemble (``stack_module_state`` + ``functional_call`` + ``vmap``, one fused Adam over the
stacked parameters; it cannot drop a finished replica, so it runs until all have stopped); one PyTorch
network at a time; scikit-learn's MLPRegressor one at a time on float32 data. Printed ratios are the
peers' seconds over the batched trainer's.

FLOP count of the batched trainer: ``6 * n_parameters * rows`` per replica and optimiser step (2 flops
per weight and row forward, 4 backward), summed over replicas and steps; validation passes are not
counted. It is reported as GFLOP/s, as a fraction of a 2048 x 2048 float32 matmul's GFLOP/s, and as a
fraction of the rate of plain ``torch.mm`` on the same products (one replica's step: forward, weight
and input gradients of every layer, at the trainer's thread count), all measured in the same run. The
last is the fair ceiling for small nets: a 29-wide layer cannot run at a 2048 x 2048 product's rate.
"""

from __future__ import annotations

import argparse
import math
import time

import numpy as np


def make_data(n, seed, D=64, noise=0.1):
    Q, _ = np.linalg.qr(np.random.default_rng(42).normal(size=(D, D)))
    rng = np.random.default_rng(seed)
    z = rng.normal(size=(n, 3))
    z /= np.linalg.norm(z, axis=1, keepdims=True)
    f = np.sin(2 * z[:, 0]) + z[:, 1] * z[:, 2]
    X = np.zeros((n, D))
    X[:, :3] = z
    return X @ Q.T, f + noise * rng.normal(size=n), f


def torch_one_at_a_time(spec, cfg, Xtr, ytr, Xva, yva, seed):
    """A plain PyTorch loop for one network: same init, schedule, batch size, early stopping."""
    from manireg._threads import torch_threads
    from manireg.nets.training import auto_threads

    n = len(Xtr)
    rows = n if n <= cfg.full_batch_threshold else min(cfg.batch_size, n)
    threads = cfg.n_threads if cfg.n_threads is not None else auto_threads(spec, rows)
    with torch_threads(threads):  # the batched trainer's thread policy, for a fair comparison
        return _torch_loop(spec, cfg, Xtr, ytr, Xva, yva, seed)


def _torch_loop(spec, cfg, Xtr, ytr, Xva, yva, seed):
    import torch

    from manireg.nets import build_network
    from manireg.nets.training import lr_at_step

    xm, xs = Xtr.mean(0), Xtr.std(0)
    xs[xs < 1e-12] = 1.0
    ym, ysd = float(ytr.mean()), float(ytr.std())
    net = build_network(spec, seed=seed, standardize=(xm, xs), target_scale=(ym, ysd))
    X = torch.tensor(Xtr, dtype=torch.float32)
    Y = torch.tensor(ytr, dtype=torch.float32)
    Xv = torch.tensor(Xva, dtype=torch.float32)
    Yv = torch.tensor(yva, dtype=torch.float32)
    opt = torch.optim.Adam(net.parameters(), lr=cfg.learning_rate)
    g = torch.Generator().manual_seed(seed)
    n = len(X)
    full = n <= cfg.full_batch_threshold
    best, best_step, best_state = math.inf, 0, None
    perm, pos = torch.randperm(n, generator=g), 0
    for step in range(cfg.max_steps + 1):
        if step % cfg.eval_every == 0 or step == cfg.max_steps:
            with torch.no_grad():
                v = float(((net(Xv) - Yv) ** 2).mean())
            if v < best * (1 - cfg.tol):
                best, best_step = v, step
                best_state = {k: t.clone() for k, t in net.state_dict().items()}
            if step == cfg.max_steps or (step >= cfg.min_steps and step - best_step >= cfg.patience_steps):
                break
        if full:
            xb, yb = X, Y
        else:
            if pos + cfg.batch_size > n:
                perm, pos = torch.randperm(n, generator=g), 0
            idx = perm[pos:pos + cfg.batch_size]
            pos += cfg.batch_size
            xb, yb = X[idx], Y[idx]
        for group in opt.param_groups:
            group["lr"] = lr_at_step(cfg, step)
        opt.zero_grad(set_to_none=True)
        loss = ((net(xb) - yb) ** 2).mean()
        loss.backward()
        opt.step()
    net.load_state_dict(best_state)
    return net, step


def torch_vmap_ensemble(spec, cfg, data, n_tr, seeds):
    """torch.func's documented way to train an ensemble at once: ``stack_module_state`` over R networks,
    ``functional_call`` of one base module under ``vmap``, autograd through the vmapped forward and one
    ``torch.optim.Adam`` over the stacked parameters. Same init, schedule, batch size, evaluation and
    early-stopping rule per replica as the others; vmap cannot drop a finished replica from the stack, so
    the loop runs until every replica has stopped (a stopped replica keeps its best weights). Returns the
    test predictions function and the number of steps run."""
    import copy

    import torch
    from torch.func import functional_call, stack_module_state, vmap

    from manireg._threads import torch_threads
    from manireg.nets import build_network
    from manireg.nets.training import auto_threads, lr_at_step

    R = len(data)
    nets, Xs, Ys, Xvs, Yvs = [], [], [], [], []
    for (X, y, _), seed in zip(data, seeds):
        Xtr, ytr = X[:n_tr], y[:n_tr]
        xm, xs = Xtr.mean(0), Xtr.std(0)
        xs[xs < 1e-12] = 1.0
        nets.append(build_network(spec, seed=seed, standardize=(xm, xs), target_scale=(float(ytr.mean()), float(ytr.std()))))
        Xs.append(Xtr), Ys.append(ytr), Xvs.append(X[n_tr:]), Yvs.append(y[n_tr:])
    X = torch.tensor(np.stack(Xs), dtype=torch.float32)
    Y = torch.tensor(np.stack(Ys), dtype=torch.float32)
    Xv = torch.tensor(np.stack(Xvs), dtype=torch.float32)
    Yv = torch.tensor(np.stack(Yvs), dtype=torch.float32)
    params, buffers = stack_module_state(nets)
    base = copy.deepcopy(nets[0]).to("meta")

    def one(p, b, x):
        return functional_call(base, (p, b), (x,))

    fwd = vmap(one)
    opt = torch.optim.Adam(list(params.values()), lr=cfg.learning_rate, fused=True)
    n = n_tr
    full = n <= cfg.full_batch_threshold
    rows = n if full else min(cfg.batch_size, n)
    gens = [torch.Generator().manual_seed(s) for s in seeds]
    perms = [torch.randperm(n, generator=g) for g in gens]
    pos = 0
    best = torch.full((R,), math.inf)
    best_step = torch.zeros(R, dtype=torch.int64)
    best_state = {k: v.detach().clone() for k, v in params.items()}
    stopped = torch.zeros(R, dtype=torch.bool)
    ar = torch.arange(R)[:, None]
    with torch_threads(cfg.n_threads if cfg.n_threads is not None else auto_threads(spec, R * rows)):
        for step in range(cfg.max_steps + 1):
            if step % cfg.eval_every == 0 or step == cfg.max_steps:
                with torch.no_grad():
                    v = ((fwd(params, buffers, Xv) - Yv) ** 2).mean(dim=1)
                better = (v < best * (1 - cfg.tol)) & ~stopped
                best = torch.where(better, v, best)
                best_step = torch.where(better, torch.full_like(best_step, step), best_step)
                for k, t in params.items():
                    best_state[k][better] = t.detach()[better]
                if step >= cfg.min_steps:
                    stopped |= (step - best_step) >= cfg.patience_steps
                if step == cfg.max_steps or bool(stopped.all()):
                    break
            if full:
                xb, yb = X, Y
            else:
                if pos + rows > n:
                    perms, pos = [torch.randperm(n, generator=g) for g in gens], 0
                idx = torch.stack([p[pos:pos + rows] for p in perms])
                pos += rows
                xb, yb = X[ar, idx], Y[ar, idx]
            for group in opt.param_groups:
                group["lr"] = lr_at_step(cfg, step)
            opt.zero_grad(set_to_none=True)
            loss = ((fwd(params, buffers, xb) - yb) ** 2).mean(dim=1).sum()
            loss.backward()
            opt.step()

    def predict(Xte):
        with torch.no_grad():
            x = torch.tensor(Xte, dtype=torch.float32)
            return vmap(one, in_dims=(0, 0, None))(best_state, buffers, x).numpy()

    return predict, step


def matched_mm_gflops(spec, rows, threads, repeats=30, rounds=3):
    """GFLOP/s of plain ``torch.mm`` on one replica's products of one training step: per layer the
    forward (rows x fan_in)(fan_in x fan_out), the weight gradient and, above the first layer, the input
    gradient -- the arithmetic the trainer does, without its stacking, its elementwise work or Python.
    Best of ``rounds`` rounds of ``repeats`` steps' products."""
    import torch

    from manireg._threads import torch_threads

    sizes = [spec.input_dim, *spec.hidden_sizes, 1]
    mats, flops = [], 0.0
    for i, (a, b) in enumerate(zip(sizes[:-1], sizes[1:])):
        h, W, g = torch.randn(rows, a), torch.randn(a, b), torch.randn(rows, b)
        mats.append((h, W))
        mats.append((h.T.contiguous(), g))
        flops += 4.0 * rows * a * b
        if i > 0:
            mats.append((g, W.T.contiguous()))
            flops += 2.0 * rows * a * b
    with torch_threads(threads):
        for x, y in mats:
            torch.mm(x, y)
        best = math.inf
        for _ in range(rounds):
            t = time.perf_counter()
            for _ in range(repeats):
                for x, y in mats:
                    torch.mm(x, y)
            best = min(best, (time.perf_counter() - t) / repeats)
    return flops / best / 1e9, flops


def matmul_gflops(size=2048, repeats=5):
    import torch

    a = torch.randn(size, size)
    b = torch.randn(size, size)
    torch.mm(a, b)
    t = time.perf_counter()
    for _ in range(repeats):
        torch.mm(a, b)
    return 2 * size**3 * repeats / (time.perf_counter() - t) / 1e9


def step_seconds(spec, replicas, rows, low, steps=60, rounds=3, update="public"):
    """Best-of-``rounds`` seconds of one trainer step (hand-written backward + fused Adam on per-replica
    slabs, as the trainer does). ``update="public"``: ``adam_update``'s public path (torch.optim's
    functional Adam, fused); ``"private"``: its private path (the fused kernel ``torch._fused_adam_``
    called directly, what the trainer uses when torch has it)."""
    stepper = trainer_step(spec, replicas, rows, low, update)
    best = math.inf
    for _ in range(rounds):
        best = min(best, stepper(steps))
    return best


def trainer_step(spec, replicas, rows, low=None, update="private", n_rows=None, module=None):
    """A function ``run(steps)`` -> seconds per step of the trainer's optimiser step on ``replicas`` stacked
    replicas, as ``BatchedTrainer`` runs it: the minibatch rows gathered with one index_select from a
    (replicas * n_rows, D) table (skipped when ``n_rows`` is None), the hand-written backward writing into
    the padded (R, P) gradient buffer, fused Adam on per-replica rows. Validation passes, stopping and
    replicas leaving the stack are not included. ``module``: the trainer module to take the step from
    (default this tree's); a module from before the gradient buffer (no ``_ROW_ALIGN``) gets that
    revision's step: fresh gradients concatenated into one (R, P) tensor and unbound every step."""
    import torch

    if module is None:
        from manireg.nets import training as module
    buffered = hasattr(module, "_ROW_ALIGN")
    Ws, bs = module._stacked_init(spec, range(replicas))
    L = len(Ws)
    shapes = [tuple(t.shape[1:]) for t in Ws + bs]
    # the trainer's layout: one contiguous (padded) row of parameters per replica
    flat = module._flatten(Ws + bs, module._ROW_ALIGN) if buffered else module._flatten(Ws + bs)
    params = module._unflatten(flat, shapes)
    grad = torch.zeros_like(flat)
    grads = module._unflatten(grad, shapes)
    m1, m2 = torch.zeros_like(flat), torch.zeros_like(flat)
    p_sl, m1_sl, m2_sl, g_sl = (list(t.unbind(0)) for t in (flat, m1, m2, grad))
    gen = torch.Generator().manual_seed(0)
    if n_rows is None:
        x, y = torch.randn(replicas, rows, spec.input_dim), torch.randn(replicas, rows)
    else:
        X, Y = torch.randn(replicas * n_rows, spec.input_dim), torch.randn(replicas * n_rows)
        idx = torch.randint(0, n_rows, (64, replicas * rows), generator=gen)
        idx += (torch.arange(replicas)[:, None] * n_rows).repeat_interleave(rows, 0).view(-1)[None]
        ys = Y[idx]
    count = [0]

    def run(steps):
        t = time.perf_counter()
        for _ in range(steps):
            k = count[0] = count[0] + 1
            if n_rows is None:
                xb, yb = x, y
            elif buffered:  # a chunk's targets gathered once (set_chunk)
                xb = X.index_select(0, idx[k % 64]).view(replicas, rows, -1)
                yb = ys[k % 64].view(replicas, rows)
            else:  # one gather of rows and one of targets per step
                xb = X.index_select(0, idx[k % 64]).view(replicas, rows, -1)
                yb = Y.index_select(0, idx[k % 64]).view(replicas, rows)
            if buffered:
                module._loss_grads(params[:L], params[L:], xb, yb, 1.0 / rows, low, out=grads)
                slabs = g_sl
            else:
                slabs = module._flatten(module._loss_grads(params[:L], params[L:], xb, yb, 1.0 / rows, low)).unbind(0)
            module.adam_update(p_sl, slabs, m1_sl, m2_sl, k, lr=1e-6, beta1=0.9, beta2=0.999, eps=1e-8,
                               private=update == "private")
        return (time.perf_counter() - t) / steps

    return run


def stacked_products(spec, replicas, rows):
    """A function ``run(steps)`` -> seconds per step of only the trainer's stacked matrix products of one
    step (forward ``baddbmm``, weight- and input-gradient ``bmm``; the output layer's one-column products
    excluded, as the trainer does them elementwise) on fixed operands that stay in cache between calls: what
    the products cost without the rest of the step between them."""
    import torch

    sizes = [spec.input_dim, *spec.hidden_sizes, 1]
    R = replicas
    Ws = [torch.randn(R, a, b) for a, b in zip(sizes[:-2], sizes[1:-1])]
    bs = [torch.randn(R, 1, b) for b in sizes[1:-1]]
    hs = [torch.randn(R, rows, a) for a in sizes[:-2]]
    gs = [torch.randn(R, rows, b) for b in sizes[1:-1]]

    def run(steps):
        t = time.perf_counter()
        for _ in range(steps):
            for i in range(len(Ws)):
                torch.baddbmm(bs[i], hs[i], Ws[i])
            for i in range(len(Ws) - 1, -1, -1):
                torch.bmm(hs[i].transpose(1, 2), gs[i])
                if i > 0:
                    torch.bmm(gs[i], Ws[i].transpose(1, 2))
        return (time.perf_counter() - t) / steps

    return run


def step_fractions(quick, replicas=5, rounds=40, steps=15, rev=None, threads=None):
    """Per n of the grid: one optimiser step of ``replicas`` stacked replicas (the trainer's step,
    ``trainer_step``) against plain torch.mm on the same products (``replicas`` x one replica's,
    ``matched_mm_gflops``), both at the trainer's thread count, in ``rounds`` short alternating rounds; the
    best round of each. Short rounds and the best of many let both sides find the same quiet moments of a
    shared machine, which a whole fit (one long run) cannot. Also timed in the same rounds: the step's stacked
    products alone (``stacked_products``), so the table splits a step into products and the rest. ``rev``:
    also the step of the trainer at that
    git revision, in the same rounds. ``threads``: torch threads of both sides instead of the trainer's
    policy (``auto_threads``)."""
    import os

    from manireg._threads import torch_threads
    from manireg.nets.training import auto_threads
    from manireg.theory import size_network

    old = _module_at(rev) if rev else None
    ns = [256, 512, 1024, 2048] if quick else [256, 512, 1024, 2048, 4096, 8192]
    print(f"one optimiser step of {replicas} stacked replicas vs torch.mm on the same products, best of {rounds} "
          f"alternating rounds of {steps} steps; load average {tuple(round(v, 2) for v in os.getloadavg())} "
          "(2 cores shared with other work)")
    if old is None:
        print("| n | width x depth | rows/step | threads | trainer step us | its products alone us | torch.mm us "
              "| fraction of the mm rate |")
        print("|---|---|---|---|---|---|---|---|")
    else:
        print(f"| n | width x depth | rows/step | threads | step us at {rev} (before) | step us (after) | "
              "its products alone us | torch.mm us | before, of mm | after, of mm |")
        print("|---|---|---|---|---|---|---|---|---|---|")
    for n in ns:
        n_tr = n - n // 5
        spec = size_network(n_tr, 2, 1, ambient_dim=64)
        rows = n_tr if n_tr <= 256 else 128
        th = auto_threads(spec, replicas * rows) if threads is None else threads
        n_rows = None if n_tr <= 256 else n_tr
        runs = {"after": trainer_step(spec, replicas, rows, n_rows=n_rows)}
        if old is not None:
            runs["before"] = trainer_step(spec, replicas, rows, n_rows=n_rows, module=old)
        runs["products"] = stacked_products(spec, replicas, rows)
        with torch_threads(th):
            best = {k: math.inf for k in runs}
            best_mm = math.inf
            for r in runs.values():
                r(steps)
            for _ in range(rounds):
                for k, r in runs.items():
                    best[k] = min(best[k], r(steps))
                rate, flops = matched_mm_gflops(spec, rows, th, repeats=steps, rounds=1)
                best_mm = min(best_mm, replicas * flops / (rate * 1e9))
        head = f"| {n} | {spec.width} x {spec.depth} | {rows} | {th or 'torch'} |"
        if old is None:
            print(f"{head} {best['after'] * 1e6:.0f} | {best['products'] * 1e6:.0f} | {best_mm * 1e6:.0f} | "
                  f"{best_mm / best['after']:.2f} |", flush=True)
        else:
            print(f"{head} {best['before'] * 1e6:.0f} | {best['after'] * 1e6:.0f} | {best['products'] * 1e6:.0f} | "
                  f"{best_mm * 1e6:.0f} | "
                  f"{best_mm / best['before']:.2f} | {best_mm / best['after']:.2f} |", flush=True)
    print(f"load average at end {tuple(round(v, 2) for v in os.getloadavg())}")
    return 0


def _module_at(rev):
    """``manireg/nets/training.py`` of git revision ``rev``, loaded as a module of its own."""
    import importlib.util
    import os
    import subprocess
    import sys

    root = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
    src = subprocess.run(["git", "show", f"{rev}:manireg/nets/training.py"], cwd=root, capture_output=True,
                         text=True, check=True).stdout
    spec_ = importlib.util.spec_from_loader("_trainer_at_rev", loader=None)
    old = importlib.util.module_from_spec(spec_)
    sys.modules[spec_.name] = old  # dataclasses look their module up
    exec(compile(src, f"{rev}:manireg/nets/training.py", "exec"), old.__dict__)
    return old


def adam_paths():
    """Per-step time of the trainer with the public fused Adam (torch.optim's functional path) and with
    the private kernel called directly, 5 replicas, float32, the trainer's thread policy, for the nets of
    the benchmark grid. Rounds alternate between the two so load drift hits both."""
    import os

    import torch

    from manireg._threads import torch_threads
    from manireg.nets.training import auto_threads
    from manireg.theory import size_network

    if not hasattr(torch, "_fused_adam_"):
        print(f"torch {torch.__version__} has no torch._fused_adam_: nothing to compare")
        return 0
    print(f"torch {torch.__version__}; load average {os.getloadavg()} (2 shared cores)")
    print(f"{'n':>6} {'width':>5} {'depth':>5} {'rows':>5} | {'public ms':>9} {'private ms':>10} {'public/private':>14}")
    for n in (256, 512, 1024, 2048, 4096, 8192):
        n_tr = n - n // 5
        spec = size_network(n_tr, 2, 1, ambient_dim=64)
        rows = n_tr if n_tr <= 256 else 128
        with torch_threads(auto_threads(spec, 5 * rows)):
            pub, pri = math.inf, math.inf
            for _ in range(3):
                pub = min(pub, step_seconds(spec, 5, rows, None, steps=40, rounds=1, update="public"))
                pri = min(pri, step_seconds(spec, 5, rows, None, steps=40, rounds=1, update="private"))
        print(f"{n:>6} {spec.width:>5} {spec.depth:>5} {rows:>5} | {pub * 1e3:>9.3f} {pri * 1e3:>10.3f} "
              f"{pub / pri:>14.3f}", flush=True)
    return 0


def crossover():
    """Per-step time in float32 and in bfloat16 mixed precision, one thread, 5 replicas."""
    import torch

    from manireg.nets.training import BF16_MIN_FLOPS, native_bfloat16
    from manireg.theory import size_network

    torch.set_num_threads(1)
    print(f"torch {torch.__version__}; native bfloat16: {native_bfloat16()}; BF16_MIN_FLOPS = {BF16_MIN_FLOPS:.0e} "
          "(one replica's step)")
    print(f"{'n':>6} {'width':>5} {'depth':>5} {'rows':>5} {'flops/replica':>13} | {'float32 ms':>10} "
          f"{'bfloat16 ms':>11} {'ratio':>6}")
    cases = [(n, 1.0) for n in (256, 512, 1024, 2048, 4096, 8192)] + [(256, 32 / 56), (256, 48 / 56)]
    for n, wm in cases:
        spec = size_network(n, 3, 1, ambient_dim=64, width_multiplier=wm)
        n_fit = int(0.8 * n)
        rows = n_fit if n_fit <= 256 else 128
        a = step_seconds(spec, 5, rows, None)
        b = step_seconds(spec, 5, rows, torch.bfloat16)
        print(f"{n:>6} {spec.width:>5} {spec.depth:>5} {rows:>5} {6.0 * spec.n_parameters * rows:>13.2e} | "
              f"{a * 1e3:>10.2f} {b * 1e3:>11.2f} {a / b:>6.2f}", flush=True)
    return 0


def circle_data(n, seed, D=10):
    """Unit circle in R^10 through a fixed rotation, noise-free target sin(2t) + 0.5 cos(t)."""
    Q, _ = np.linalg.qr(np.random.default_rng(1234).normal(size=(D, D)))
    t = np.random.default_rng(seed).uniform(0, 2 * np.pi, n)
    P = np.zeros((n, D))
    P[:, 0], P[:, 1] = np.cos(t), np.sin(t)
    return P @ Q.T, np.sin(2 * t) + 0.5 * np.cos(t)


def floor():
    """Noise-free target on a circle (d = 1), a wide net, long training: the lowest test MSE of each
    arithmetic."""
    from manireg.nets import BatchedTrainer, ReplicaTask, TrainConfig
    from manireg.theory import size_network

    n, n_val = 4096, 1024
    tasks = []
    for r in range(3):
        X, f = circle_data(n + n_val, seed=r)
        tasks.append(ReplicaTask(X[:n], f[:n], X[n:], f[n:], seed=r))
    Xte, fte = circle_data(2000, seed=99)
    spec = size_network(n, 1, 1, ambient_dim=Xte.shape[1], width_multiplier=4)
    print(f"circle in R^10, n {n}, width {spec.width}, depth {spec.depth}, target variance {fte.var():.4f}; "
          "test MSE / target variance per replica")
    for steps in (500, 2000):
        for precision in ("float32", "bfloat16"):
            cfg = TrainConfig(precision=precision, max_steps=steps, patience_steps=10**6)
            trainer = BatchedTrainer(spec, cfg)
            t = time.perf_counter()
            trainer.fit(tasks)
            secs = time.perf_counter() - t
            rel = np.mean((trainer.predict(Xte) - fte) ** 2, axis=1) / fte.var()
            print(f"{steps:>5} steps {precision:>8}: {secs:6.1f} s  " + "  ".join(f"{v:.2e}" for v in rel),
                  flush=True)
    return 0


def against(rev, quick, rounds=3):
    """The trainer of git revision ``rev`` against the working tree's, the same tasks (5 repeats, the
    benchmark grid, default float32 config), rounds alternating; per n the best-of-``rounds`` seconds of
    each and each one's fraction of plain torch.mm's rate on the same products (timed in every round too,
    best round: the reference sees the same load as the fits)."""
    import os

    from manireg._threads import torch_threads  # noqa: F401 - imported by the old module too
    from manireg.nets import BatchedTrainer, ReplicaTask, TrainConfig
    from manireg.nets.training import auto_threads
    from manireg.theory import size_network

    old = _module_at(rev)
    cfg = TrainConfig(precision="float32")
    ns = [256, 512, 1024, 2048] if quick else [256, 512, 1024, 2048, 4096, 8192]
    print(f"trainer at {rev} (before) against the working tree (after); load average "
          f"{tuple(round(v, 2) for v in os.getloadavg())} (2 cores shared with other work)")
    print("| n | before s | after s | before/after | before, of mm | after, of mm | same numbers |")
    print("|---|---|---|---|---|---|---|")
    for n in ns:
        n_tr = n - n // 5
        data = [make_data(n, seed=1000 * n + r) for r in range(5)]
        spec = size_network(n_tr, 2, 1, ambient_dim=64)
        tasks = [ReplicaTask(X[:n_tr], y[:n_tr], X[n_tr:], y[n_tr:], seed=r) for r, (X, y, _) in enumerate(data)]
        rows = n_tr if n_tr <= cfg.full_batch_threshold else min(cfg.batch_size, n_tr)
        mm_rate = 0.0
        best = {"before": math.inf, "after": math.inf}
        out = {}
        for _ in range(rounds):
            rate, mm_flops = matched_mm_gflops(spec, rows, auto_threads(spec, 5 * rows))
            mm_rate = max(mm_rate, rate)
            for name, mod in (("before", old), ("after", None)):
                cls, conf, task = ((BatchedTrainer, cfg, ReplicaTask) if mod is None
                                   else (mod.BatchedTrainer, mod.TrainConfig(precision="float32"), mod.ReplicaTask))
                t = time.perf_counter()
                out[name] = cls(spec, conf).fit([task(t_.X_train, t_.y_train, t_.X_val, t_.y_val, seed=t_.seed)
                                                 for t_ in tasks])
                best[name] = min(best[name], time.perf_counter() - t)
        frac = {k: sum(r.steps for r in out[k]) * mm_flops / (mm_rate * 1e9) / best[k] for k in best}
        same = all((a.val_mse, a.steps) == (b.val_mse, b.steps) for a, b in zip(out["before"], out["after"]))
        print(f"| {n} | {best['before']:.2f} | {best['after']:.2f} | {best['before'] / best['after']:.2f} | "
              f"{frac['before']:.2f} | {frac['after']:.2f} | {'yes' if same else 'no'} |", flush=True)
    return 0


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="n up to 2048, 3 repeats")
    parser.add_argument("--repeats", type=int, default=None)
    parser.add_argument("--precision", default="float32", choices=("float32", "bfloat16", "auto"),
                        help="arithmetic of the batched trainer (the other two are float32)")
    parser.add_argument("--crossover", action="store_true", help="only time float32 vs bfloat16 steps")
    parser.add_argument("--floor", action="store_true", help="only the noise-free floor of each arithmetic")
    parser.add_argument("--adam", action="store_true", help="only the public vs private fused Adam step times")
    parser.add_argument("--against", metavar="REV", help="only: the trainer of git revision REV vs this one")
    parser.add_argument("--threads", type=int, default=None,
                        help="with --steps: torch threads of both sides instead of the trainer's policy")
    parser.add_argument("--steps", action="store_true",
                        help="only: one optimiser step vs torch.mm on the same products, short alternating rounds "
                             "(--repeats: stacked replicas, default 5; with --against REV also REV's step)")
    args = parser.parse_args(argv)
    if args.steps:
        return step_fractions(args.quick, replicas=args.repeats or 5, rev=args.against, threads=args.threads)
    if args.against:
        return against(args.against, args.quick)
    if args.adam:
        return adam_paths()
    if args.crossover:
        return crossover()
    if args.floor:
        return floor()

    import os

    import torch
    from sklearn.neural_network import MLPRegressor
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    from manireg.nets import BatchedTrainer, ReplicaTask, TrainConfig
    from manireg.nets.training import auto_threads
    from manireg.theory import size_network

    ns = [256, 512, 1024, 2048] if args.quick else [256, 512, 1024, 2048, 4096, 8192]
    repeats = args.repeats or (3 if args.quick else 5)
    cfg = TrainConfig(precision=args.precision)
    Xte, _, fte = make_data(2000, seed=10**6)
    peak = matmul_gflops()
    print(f"torch {torch.__version__}, threads {torch.get_num_threads()}, repeats {repeats}, config {cfg}")
    print(f"load average at start {tuple(round(v, 2) for v in os.getloadavg())} (2 cores shared with other work)")
    print(f"reference: 2048x2048 float32 matmul {peak:.1f} GFLOP/s; 'of mm' = the time plain torch.mm takes for "
          "the same products (one replica's shapes, the trainer's threads) over the trainer's time")
    print("peers: vmap = torch.func stack_module_state + functional_call + vmap, one Adam; torch1 = one network at "
          "a time; sklearn = MLPRegressor one at a time on float32 data")
    header = (f"{'n':>6} {'width':>5} {'depth':>5} | {'batched s':>9} {'vmap s':>8} {'torch1 s':>8} {'sklearn s':>9} | "
              f"{'mse batched':>11} {'mse vmap':>9} {'mse torch1':>10} {'mse sklearn':>11} | {'x vmap':>6} "
              f"{'x torch1':>8} {'x sklearn':>9} | {'GFLOP/s':>7} {'of 2048':>7} {'of mm':>6} {'stops':>14}")
    print(header)
    tot = {"b": 0.0, "v": 0.0, "t": 0.0, "s": 0.0, "flops": 0.0}
    table, goals = [], []
    for n in ns:
        n_val = n // 5
        data = [make_data(n, seed=1000 * n + r) for r in range(repeats)]
        n_tr = n - n_val
        spec = size_network(n_tr, 2, 1, ambient_dim=64)
        tasks = [ReplicaTask(X[:n_tr], y[:n_tr], X[n_tr:], y[n_tr:], seed=r) for r, (X, y, _) in enumerate(data)]
        rows = n_tr if n_tr <= cfg.full_batch_threshold else min(cfg.batch_size, n_tr)
        mm_rate, mm_flops = matched_mm_gflops(spec, rows, auto_threads(spec, repeats * rows))
        # 1) batched
        t = time.perf_counter()
        trainer = BatchedTrainer(spec, cfg)
        res = trainer.fit(tasks)
        tb = time.perf_counter() - t
        # the reference again right after the fit, best of the two: closer to the load the fit saw
        mm_rate = max(mm_rate, matched_mm_gflops(spec, rows, auto_threads(spec, repeats * rows))[0])
        mse_b = float(np.mean((trainer.predict(Xte) - fte) ** 2, axis=1).mean())
        flops = sum(6.0 * spec.n_parameters * rows * r.steps for r in res)
        gfl = flops / tb / 1e9
        of_mm = sum(r.steps for r in res) * mm_flops / (mm_rate * 1e9) / tb
        # 2) torch.func vmap ensemble
        t = time.perf_counter()
        predict, _ = torch_vmap_ensemble(spec, cfg, data, n_tr, list(range(repeats)))
        tv = time.perf_counter() - t
        mse_v = float(np.mean((predict(Xte) - fte) ** 2, axis=1).mean())
        # 3) one at a time, plain PyTorch
        t = time.perf_counter()
        mses = []
        for r, (X, y, _) in enumerate(data):
            net, _ = torch_one_at_a_time(spec, cfg, X[:n_tr], y[:n_tr], X[n_tr:], y[n_tr:], seed=r)
            with torch.no_grad():
                mses.append(float(((net(torch.tensor(Xte, dtype=torch.float32)).numpy() - fte) ** 2).mean()))
        tt = time.perf_counter() - t
        mse_t = float(np.mean(mses))
        # 4) scikit-learn, float32 data (MLPRegressor keeps float32)
        t = time.perf_counter()
        mses = []
        for r, (X, y, _) in enumerate(data):
            skl = make_pipeline(StandardScaler(), MLPRegressor(
                hidden_layer_sizes=spec.hidden_sizes, batch_size=min(cfg.batch_size, n_tr),
                learning_rate_init=cfg.learning_rate, early_stopping=True, validation_fraction=0.2,
                max_iter=200, random_state=r)).fit(X.astype(np.float32), y.astype(np.float32))
            mses.append(float(((skl.predict(Xte.astype(np.float32)) - fte) ** 2).mean()))
        ts = time.perf_counter() - t
        mse_s = float(np.mean(mses))
        tot["b"] += tb
        tot["v"] += tv
        tot["flops"] += flops
        tot["t"] += tt
        tot["s"] += ts
        stops = ",".join(sorted({r.stop_reason for r in res}))
        table.append((n, spec.width, spec.depth, rows, gfl, mm_rate, of_mm))
        steps = [r.steps for r in res]
        goals.append({"n": n, "of_mm": of_mm, "x_sklearn": ts / tb, "mse": mse_b, "mse_sklearn": mse_s,
                      # what the products do not explain: seconds per step of the stack beyond torch.mm's time,
                      # and how tall the stack was on average (replicas stop at different steps)
                      "beyond_us": (tb - sum(steps) * mm_flops / (mm_rate * 1e9)) / max(steps) * 1e6,
                      "mm_us": mm_flops / (mm_rate * 1e9) * 1e6, "mean_stack": sum(steps) / max(steps)})
        print(f"{n:>6} {spec.width:>5} {spec.depth:>5} | {tb:>9.2f} {tv:>8.2f} {tt:>8.2f} {ts:>9.2f} | {mse_b:>11.5f} "
              f"{mse_v:>9.5f} {mse_t:>10.5f} {mse_s:>11.5f} | {tv / tb:>6.2f} {tt / tb:>8.2f} {ts / tb:>9.2f} | "
              f"{gfl:>7.2f} {gfl / peak:>7.3f} {of_mm:>6.3f} {stops:>14}", flush=True)
    print(f"total seconds: batched {tot['b']:.1f}, vmap {tot['v']:.1f}, torch one-at-a-time {tot['t']:.1f}, sklearn "
          f"{tot['s']:.1f}; batched is x{tot['v'] / tot['b']:.2f} vs vmap, x{tot['t'] / tot['b']:.2f} vs torch "
          f"one-at-a-time, x{tot['s'] / tot['b']:.2f} vs sklearn; batched {tot['flops'] / tot['b'] / 1e9:.2f} GFLOP/s "
          f"overall = {tot['flops'] / tot['b'] / 1e9 / peak:.3f} of the 2048x2048 matmul")
    print(f"load average at end {tuple(round(v, 2) for v in os.getloadavg())}")
    print("\n| n | width x depth | rows/step | trainer GFLOP/s | torch.mm GFLOP/s, same shapes | fraction of the mm rate |")
    print("|---|---|---|---|---|---|")
    for n, w, dpt, rows, gfl, mm_rate, of_mm in table:
        print(f"| {n} | {w} x {dpt} | {rows} | {gfl:.2f} | {mm_rate:.2f} | {of_mm:.2f} |")
    print_goals(goals, args.precision)
    return 0


def print_goals(goals, precision):
    """The trainer goals per n, MET or SHORTFALL, and for a shortfall the measured split of a step's time."""
    print(f"\nGOALS ({precision}; the machine's load moves these figures: compare within one run)")
    for g in goals:
        rate = "MET" if g["of_mm"] >= 0.6 else "SHORTFALL"
        fast = "MET" if g["x_sklearn"] >= 10 and g["mse"] <= g["mse_sklearn"] else "SHORTFALL"
        line = (f"  n={g['n']}: fraction of the mm rate {g['of_mm']:.2f} (goal 0.6) {rate}; x{g['x_sklearn']:.1f} vs "
                f"sklearn (goal 10x at equal or lower error; error {g['mse']:.5f} vs {g['mse_sklearn']:.5f}) {fast}")
        if rate == "SHORTFALL":
            line += (f"\n      cause: {g['beyond_us']:.0f} us per stacked step beyond the products (one replica's "
                     f"products take {g['mm_us']:.0f} us at torch.mm's rate); the stack held {g['mean_stack']:.1f} "
                     "replicas on average, so that fixed cost is shared by few")
        print(line)


if __name__ == "__main__":
    raise SystemExit(main())
