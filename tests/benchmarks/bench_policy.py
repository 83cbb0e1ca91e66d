"""Time of the two-stage policy fit: all replicas at once (batched trainer) against one at a time.

The "one at a time" side is :func:`manireg.curves.policy.fit_stage_loop` for the propensity and policy
stages and one ``BatchedTrainer`` call per replica for the reward models. The "batched" side is what a
policy cell runs: the reward models of every repeat, fold and action in one ``BatchedTrainer.fit``, and the
propensity and policy stages through :func:`manireg.curves.policy.fit_stage` (the batched trainer when it
has task losses, otherwise the same loop, in which case the two sides differ only in the reward models).

    python tests/benchmarks/bench_policy.py --quick
"""

from __future__ import annotations

import argparse
import time

import numpy as np


def _tasks(data, n, repeats, folds):
    from manireg.curves.policy import _fold_of
    from manireg.nets.training import ReplicaTask

    rng = np.random.default_rng(0)
    reward, prop, policy = [], [], []
    K = data.n_actions
    for r in range(repeats):
        rows = rng.permutation(len(data.X))[:n]
        fold = _fold_of(n, folds)
        for f in range(folds):
            tr = rows[fold != f]
            for a in range(K):
                sel = tr[data.action[tr] == a]
                reward.append(ReplicaTask(data.X[sel], data.reward[sel], seed=100 * r + 10 * f + a))
            prop.append(ReplicaTask(data.X[tr], data.action[tr], seed=100 * r + f))
        G = rng.standard_normal((n, K))
        policy.append(ReplicaTask(data.X[rows[: int(0.8 * n)]], G[: int(0.8 * n)], data.X[rows[int(0.8 * n):]],
                                  G[int(0.8 * n):], seed=r))
    return reward, prop, policy


def main(argv=None):
    from manireg.curves.policy import fit_stage, fit_stage_loop
    from manireg.data.bandits import logged_bandit
    from manireg.nets.training import BatchedTrainer, TrainConfig
    from manireg.theory.sizing import size_network

    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--quick", action="store_true", help="n = 400, 3 repeats, 150 steps")
    args = p.parse_args(argv)
    n, repeats, steps = (400, 3, 150) if args.quick else (2000, 5, 500)
    folds = 2
    data = logged_bandit("sphere", 3 * n, d=2, ambient_dim=16, n_actions=3, seed=0)
    cfg = TrainConfig(max_steps=steps, min_steps=steps)
    reward, prop, policy = _tasks(data, n, repeats, folds)
    arch_r = size_network(n // 3, 2, 1.0, 16)
    arch_e = size_network(n // 2, 2, 1.0, 16)
    arch_p = size_network(int(0.8 * n), 2, 1.0, 16)

    warm = TrainConfig(max_steps=5, min_steps=5)  # first calls pay one-off set-up costs; keep them out of both sides
    BatchedTrainer(arch_r, warm).fit(reward[:2])
    fit_stage_loop("policy", policy[:1], arch_p, warm, 3)

    t0 = time.perf_counter()
    BatchedTrainer(arch_r, cfg).fit(reward)
    e = fit_stage("propensity", prop, arch_e, cfg, 3)
    s = fit_stage("policy", policy, arch_p, cfg, 3)
    batched = time.perf_counter() - t0

    t0 = time.perf_counter()
    for t in reward:
        BatchedTrainer(arch_r, cfg).fit([t])
    fit_stage_loop("propensity", prop, arch_e, cfg, 3)
    fit_stage_loop("policy", policy, arch_p, cfg, 3)
    loop = time.perf_counter() - t0
    print(f"two-stage fit, n = {n}, {repeats} repeats, {folds} folds, 3 actions, {steps} steps: "
          f"{len(reward)} reward + {len(prop)} propensity + {len(policy)} policy replicas")
    print(f"  batched ({e.path} propensity, {s.path} policy stage): {batched:.1f} s")
    print(f"  one at a time:                                  {loop:.1f} s")
    print(f"  ratio one-at-a-time / batched: {loop / batched:.2f}")


if __name__ == "__main__":
    main()
