"""Policy campaigns: doubly robust off-policy learning from logged bandit data, with regret curves.

A policy campaign is a campaign (same cells, store, executors and exponent fits as a regression campaign)
whose cell is a two-stage fit on the cell's ``n`` logged rows ``(x_i, a_i, r_i)``:

Stage 1, with ``folds``-fold cross-fitting (the cell's rows are dealt into folds; each row's nuisances come
from models trained on the other folds):

* reward regression per action, ``mu_hat_a(x)`` (squared loss, the batched ReLU trainer, sized by the rules);
* propensities ``e_hat_a(x)`` (softmax network, multinomial logistic loss), unless the data carry logged
  propensities, which are then used as given.

Doubly robust (augmented inverse-propensity) scores [1]_ [2]_

    Gamma_i(a) = mu_hat_a(x_i) + 1{a_i = a} (r_i - mu_hat_a(x_i)) / max(e_hat_{a_i}(x_i), clip)

where ``clip`` (default :data:`DEFAULT_CLIP`; None for none) is the stated propensity clipping. Stage 2 fits
a softmax policy network ``pi(x)`` maximising ``mean_i sum_a pi_a(x_i) Gamma_i(a)`` [3]_.

Learners (kind ``"policy"``, parameter ``method``), all in the same campaign:

``"dr"``      stage 2 on the doubly robust scores;
``"direct"``  the direct method: ``argmax_a mu_hat_a(x)``, no stage 2;
``"ipw"``     stage 2 on inverse-propensity scores ``1{a_i = a} r_i / max(e_hat, clip)``;
``"oracle"``  stage 2 on the doubly robust scores built from the TRUE ``mu`` and ``e`` (synthetic data): the
              reference a learner with perfect nuisances reaches.

Metrics per cell (row columns :data:`POLICY_COLUMNS`), on the campaign's fixed test rows, for the greedy
policy ``argmax_a pi_a(x)``:

* ``regret`` = mean over test rows of ``max_a mu_a(x) - mu_{pi(x)}(x)``: exact for synthetic data (the true
  conditional means, no reward noise), None for a table;
* ``value_estimate`` and ``value_se``: the doubly robust value estimate of the policy on the test rows (with
  the cell's stage-1 models) and its standard error ``sd / sqrt(m)``;
* overlap diagnostics of the cell's propensities of the taken actions: ``ess`` (effective sample size
  ``(sum w)^2 / sum w^2`` of the weights ``w = 1 / max(e, clip)``), ``clipped_share`` (share of rows whose
  propensity was raised to ``clip``) and ``overlap_json`` (histogram counts on [0, 1], minimum).

No reference regret rate is drawn: the published guarantees we know of (policy learning with doubly robust
scores [3]_; the minimax lower bound for Lipschitz rewards [4]_) are recalled, not verified against the
papers with their conditions, so only the measured exponent is shown (docs/policy.md).

References
----------
.. [1] J. M. Robins, A. Rotnitzky, L. P. Zhao, "Estimation of regression coefficients when some regressors
   are not always observed", JASA 89 (1994).
.. [2] M. Dudík, J. Langford, L. Li, "Doubly robust policy evaluation and learning", ICML 2011.
.. [3] S. Athey, S. Wager, "Policy learning with observational data", Econometrica 89 (2021).
.. [4] J.-Y. Audibert, A. B. Tsybakov, "Fast learning rates for plug-in classifiers", Ann. Statist. 35 (2007).
"""

from __future__ import annotations

import collections
import dataclasses
import hashlib
import json
import math
import os
import tempfile
import time
from dataclasses import dataclass, field

import numpy as np

from manireg._results import ResultMixin
from manireg._validation import check_float, check_int
from manireg.curves.campaign import Campaign, CampaignResult
from manireg.curves.learners import Learner, LearnerSpec, register_learner
from manireg.curves.sweep import MIN_SIZE, CampaignData, _seed_int, check_sizes, expand
from manireg.data.bandits import LoggedBandit, check_logged, logged_bandit

__all__ = [
    "METHODS", "DEFAULT_FOLDS", "DEFAULT_CLIP", "POLICY_COLUMNS", "HIST_BINS", "MIN_ROWS_PER_ACTION",
    "clip_propensity", "dr_scores", "ipw_scores", "policy_value", "greedy_actions", "regret",
    "effective_sample_size", "overlap_diagnostics", "OverlapDiagnostics", "StageFit", "fit_stage_loop",
    "fit_stage", "PolicyLearner", "PolicySpec", "PolicyData", "prepare_policy", "check_fold_coverage",
    "PolicyCampaign", "PolicyResult", "PolicyMap", "learned_policy", "demo_scenario",
]

METHODS = ("dr", "direct", "ipw", "oracle")
DEFAULT_FOLDS = 2
#: Default propensity clipping: weights use ``max(e, 0.01)``.
DEFAULT_CLIP = 0.01
#: Row columns a policy cell fills (besides the common ones).
POLICY_COLUMNS = ("regret", "policy_value", "value_estimate", "value_se", "ess", "clipped_share", "overlap_json")
HIST_BINS = 20
#: Every action must have at least this many rows in the training part of every fold of every cell.
MIN_ROWS_PER_ACTION = 5


# ------------------------------------------------------------------------------------------ estimators
def clip_propensity(e, clip=None):
    """``(max(e, clip), share of entries raised)``; ``clip=None`` leaves ``e`` unchanged (share 0)."""
    e = np.asarray(e, dtype=np.float64)
    if clip is None:
        return e, 0.0
    low = e < clip
    return np.where(low, clip, e), float(np.mean(low)) if e.size else 0.0


def dr_scores(mu_hat, e_taken, action, reward, clip=None):
    """Doubly robust scores ``Gamma_i(a) = mu_hat_a(x_i) + 1{a_i = a} (r_i - mu_hat_a(x_i)) / e_i``.

    Parameters
    ----------
    mu_hat : (n, K) array
        Reward estimates of every action at every row.
    e_taken : (n,) array
        Propensity of the action taken at each row (estimated or logged); clipped below at ``clip``.
    action : (n,) int array
    reward : (n,) array
    clip : float or None

    Returns
    -------
    (n, K) array. ``mean_i Gamma_i(pi(x_i))`` estimates the value of a policy ``pi``; it is unbiased when either
    ``mu_hat`` or the propensities are correct (and no clipping binds) [1]_ [2]_.

    References
    ----------
    .. [1] J. M. Robins, A. Rotnitzky, L. P. Zhao, JASA 89 (1994).
    .. [2] M. Dudík, J. Langford, L. Li, ICML 2011.
    """
    mu_hat = np.asarray(mu_hat, dtype=np.float64)
    n = mu_hat.shape[0]
    e, _ = clip_propensity(e_taken, clip)
    idx = np.arange(n)
    G = mu_hat.copy()
    G[idx, action] += (np.asarray(reward, float) - mu_hat[idx, action]) / e
    return G


def ipw_scores(e_taken, action, reward, n_actions, clip=None):
    """Inverse-propensity scores ``1{a_i = a} r_i / e_i`` (an (n, K) array)."""
    e, _ = clip_propensity(e_taken, clip)
    n = len(e)
    G = np.zeros((n, int(n_actions)))
    G[np.arange(n), action] = np.asarray(reward, float) / e
    return G


def greedy_actions(pi):
    """``argmax_a pi_a(x)`` per row of an (m, K) array of probabilities or scores."""
    return np.argmax(np.asarray(pi), axis=1)


def policy_value(scores, policy):
    """``(mean, standard error)`` of ``sum_a policy_a(x_i) scores_i(a)`` over rows.

    ``policy`` is an (m,) array of actions (a deterministic policy) or an (m, K) array of probabilities.
    """
    S = np.asarray(scores, dtype=np.float64)
    p = np.asarray(policy)
    v = S[np.arange(len(S)), p.astype(int)] if p.ndim == 1 else (S * p).sum(axis=1)
    se = float(np.std(v, ddof=1) / math.sqrt(len(v))) if len(v) > 1 else float("nan")
    return float(np.mean(v)), se


def regret(actions, mu):
    """Mean over rows of ``max_a mu_a(x) - mu_{action}(x)`` (exact on these rows: the true means)."""
    mu = np.asarray(mu, dtype=np.float64)
    a = np.asarray(actions, dtype=int)
    return float(np.mean(mu.max(axis=1) - mu[np.arange(len(a)), a]))


def effective_sample_size(w):
    """Kish's effective sample size ``(sum w)^2 / sum w^2`` of nonnegative weights (n for equal weights)."""
    w = np.asarray(w, dtype=np.float64)
    s2 = float(np.sum(w * w))
    return float(np.sum(w) ** 2 / s2) if s2 > 0 else 0.0


@dataclass
class OverlapDiagnostics(ResultMixin):
    """Overlap of logged data: the propensities of the actions taken.

    Attributes
    ----------
    counts : list of int
        Histogram of the propensities on ``HIST_BINS`` equal bins of [0, 1].
    edges : list of float
    min_propensity : float
    ess : float
        Effective sample size of the weights ``1 / max(e, clip)`` (out of ``n``).
    clipped_share : float
        Share of rows whose propensity was below ``clip``.
    n : int
    clip : float or None
    """

    counts: list
    edges: list
    min_propensity: float
    ess: float
    clipped_share: float
    n: int
    clip: float | None = None

    @property
    def ess_fraction(self) -> float:
        return self.ess / self.n if self.n else float("nan")


def overlap_diagnostics(e_taken, clip=None, bins=HIST_BINS) -> OverlapDiagnostics:
    """Histogram, effective sample size and clipped share of the propensities of the taken actions."""
    e = np.asarray(e_taken, dtype=np.float64)
    ec, share = clip_propensity(e, clip)
    counts, edges = np.histogram(e, bins=bins, range=(0.0, 1.0))
    return OverlapDiagnostics(counts=[int(c) for c in counts], edges=[float(v) for v in edges],
                              min_propensity=float(e.min()) if e.size else float("nan"),
                              ess=effective_sample_size(1.0 / ec), clipped_share=share, n=int(e.size), clip=clip)


# ------------------------------------------------------------------------------------------ stage fits
@dataclass
class StageFit:
    """A fitted stage (propensities or policy) of several replicas.

    ``results`` holds per replica ``train_loss``, ``val_loss`` (cross-entropy in nats, or minus the mean
    policy value of the scaled scores), ``steps``, ``best_step``, ``stop_reason``, ``seconds``,
    ``n_parameters``; ``path`` says which implementation ran (``"batched"`` or ``"loop"``).
    """

    results: list
    path: str
    predictor: object = field(repr=False, default=None)

    def predict(self, X, replica: int):
        """(m, K) probabilities of one replica."""
        return np.asarray(self.predictor(np.asarray(X, dtype=np.float64), replica), dtype=np.float64)


_LOSSES = {"propensity": "cross_entropy", "policy": "policy"}


def _loss(kind, logits, y):
    import torch

    if kind == "propensity":
        return torch.nn.functional.cross_entropy(logits, y)
    return -(torch.softmax(logits, dim=1) * y).sum(dim=1).mean()


def _fit_one(kind, task, spec, config, n_outputs):
    """Train one softmax network with torch.optim.Adam (the per-replica reference of the batched trainer)."""
    import torch

    from manireg.nets.training import lr_at_step

    t0 = time.perf_counter()
    seed = int(task.seed)
    X = np.asarray(task.X_train, np.float64)
    y = np.asarray(task.y_train)
    if task.X_val is None:
        rng = np.random.default_rng(seed)
        perm = rng.permutation(len(X))
        nv = max(1, int(round(config.validation_fraction * len(X))))
        Xv, yv, X, y = X[perm[:nv]], y[perm[:nv]], X[perm[nv:]], y[perm[nv:]]
    else:
        Xv, yv = np.asarray(task.X_val, np.float64), np.asarray(task.y_val)
    mean, std = X.mean(axis=0), X.std(axis=0)
    std = np.where(std > 1e-8, std, 1.0)
    tX = torch.as_tensor((X - mean) / std, dtype=torch.float32)
    tXv = torch.as_tensor((Xv - mean) / std, dtype=torch.float32)
    if kind == "propensity":
        ty, tyv = torch.as_tensor(y, dtype=torch.long), torch.as_tensor(yv, dtype=torch.long)
    else:
        ty, tyv = torch.as_tensor(y, dtype=torch.float32), torch.as_tensor(yv, dtype=torch.float32)
    g = torch.Generator().manual_seed(seed)
    dims = [X.shape[1]] + [int(spec.width)] * int(spec.depth) + [int(n_outputs)]
    params = []
    for i, (a, b) in enumerate(zip(dims[:-1], dims[1:])):
        gain = 2.0 if i < len(dims) - 2 else 1.0
        W = (torch.randn(a, b, generator=g) * math.sqrt(gain / a)).requires_grad_()
        params += [W, torch.zeros(b, requires_grad=True)]

    def forward(x, ps):
        h = x
        for j in range(0, len(ps) - 2, 2):
            h = torch.relu(h @ ps[j] + ps[j + 1])
        return h @ ps[-2] + ps[-1]

    opt = torch.optim.Adam(params, lr=config.learning_rate, betas=(config.beta1, config.beta2), eps=config.adam_eps)
    n = len(X)
    full = n <= config.full_batch_threshold
    best, best_step, best_state, stop = math.inf, 0, [p.detach().clone() for p in params], "step_cap"
    step = 0
    for step in range(config.max_steps):
        for grp in opt.param_groups:
            grp["lr"] = lr_at_step(config, step)
        if full:
            xb, yb = tX, ty
        else:
            idx = torch.randint(0, n, (config.batch_size,), generator=g)
            xb, yb = tX[idx], ty[idx]
        opt.zero_grad()
        _loss(kind, forward(xb, params), yb).backward()
        opt.step()
        if (step + 1) % config.eval_every == 0 or step + 1 == config.max_steps:
            with torch.no_grad():
                v = float(_loss(kind, forward(tXv, params), tyv))
            if v < best - config.tol * abs(best) if math.isfinite(best) else True:
                best, best_step, best_state = v, step + 1, [p.detach().clone() for p in params]
            elif step + 1 >= config.min_steps and step + 1 - best_step >= config.patience_steps:
                stop = "patience"
                break
    with torch.no_grad():
        train_loss = float(_loss(kind, forward(tX, best_state), ty))
        val_loss = float(_loss(kind, forward(tXv, best_state), tyv))
    result = {"train_loss": train_loss, "val_loss": val_loss, "steps": step + 1, "best_step": best_step,
              "stop_reason": stop, "seconds": time.perf_counter() - t0,
              "n_parameters": int(sum(p.numel() for p in best_state)), "precision": "float32"}

    def predict(Xq):
        with torch.no_grad():
            z = forward(torch.as_tensor((Xq - mean) / std, dtype=torch.float32), best_state)
            return torch.softmax(z, dim=1).double().numpy()

    return result, predict


def fit_stage_loop(kind, tasks, spec, config, n_outputs) -> StageFit:
    """Fit one softmax network per task, one after another (plain PyTorch autograd and ``torch.optim.Adam``).

    ``kind`` is ``"propensity"`` (``y`` integer labels in ``[0, n_outputs)``, multinomial logistic loss) or
    ``"policy"`` (``y`` an (n, K) array of scores, loss minus ``mean_i sum_a softmax(z_i)_a y_i(a)``). Each
    replica: hidden layers ``spec.depth`` x ``spec.width`` with ReLU, inputs standardised by its training
    rows, He initialisation from a private generator seeded with ``task.seed``, ``config``'s learning-rate
    schedule, minibatches above ``config.full_batch_threshold`` rows, and early stopping on the validation
    loss (best weights restored). This is the reference the batched trainer is compared with.
    """
    if kind not in _LOSSES:
        raise ValueError(f"the 'kind' parameter of fit_stage_loop must be one of {sorted(_LOSSES)}; got {kind!r}.")
    from manireg._threads import torch_threads

    with torch_threads(config.n_threads or 1):  # small nets: one thread is fastest, and fair on a shared machine
        fits = [_fit_one(kind, t, spec, config, n_outputs) for t in tasks]
    return StageFit([r for r, _ in fits], "loop", lambda X, i: fits[i][1](X))


def fit_stage(kind, tasks, spec, config, n_outputs, *, implementation="auto") -> StageFit:
    """Fit a softmax stage for every task: the batched trainer when it has task losses, else the loop.

    ``implementation``: ``"auto"`` (the batched trainer with ``loss="cross_entropy"``/``"policy"`` and
    ``n_outputs=K``; when the installed trainer does not take ``loss=``, :func:`fit_stage_loop`),
    ``"batched"`` or ``"loop"``.
    """
    if implementation not in ("auto", "batched", "loop"):
        raise ValueError(f"the 'implementation' parameter of fit_stage must be 'auto', 'batched' or 'loop'; got {implementation!r}.")
    if kind not in _LOSSES:
        raise ValueError(f"the 'kind' parameter of fit_stage must be one of {sorted(_LOSSES)}; got {kind!r}.")
    if implementation == "loop":
        return fit_stage_loop(kind, tasks, spec, config, n_outputs)
    from manireg.nets.training import BatchedTrainer

    try:
        trainer = BatchedTrainer(spec, config, loss=_LOSSES[kind], n_outputs=int(n_outputs))
    except TypeError:
        if implementation == "batched":
            raise ValueError("fit_stage(implementation='batched'): the installed BatchedTrainer has no task losses "
                             "(loss=...); use implementation='auto' or 'loop'.") from None
        return fit_stage_loop(kind, tasks, spec, config, n_outputs)
    results = trainer.fit(tasks)
    out = [{"train_loss": float(r.train_loss), "val_loss": float(r.val_loss), "steps": int(r.steps),
            "best_step": int(r.best_step), "stop_reason": str(r.stop_reason), "seconds": float(r.seconds),
            "n_parameters": int(r.n_parameters), "precision": str(getattr(r, "precision", "float32"))}
           for r in results]
    return StageFit(out, "batched", lambda X, i: trainer.predict(X, replica=i))


# ------------------------------------------------------------------------------------------ stage 1
@dataclass
class _Nuisances:
    rows: np.ndarray
    mu_oof: np.ndarray
    e_oof: np.ndarray  # propensity of the taken action, out of fold (or logged)
    mu_test: np.ndarray
    e_test: np.ndarray  # propensity of the taken action at the test rows
    reward_mse: float
    seconds: float
    propensity_path: str


_CACHE: "collections.OrderedDict" = collections.OrderedDict()
_CACHE_SIZE = 32


def _fold_of(n, folds):
    return np.arange(n) % folds


def _stage1(cells, data, train, constants):
    """Cross-fitted nuisances of each cell (cached per data, n, seed and settings, so the learners of one
    campaign share them within a process)."""
    from manireg.nets.training import BatchedTrainer, ReplicaTask
    from manireg.theory.sizing import size_network

    settings = json.dumps({"train": dataclasses.asdict(train), "constants": dataclasses.asdict(constants),
                           "folds": data.folds}, sort_keys=True, default=str)
    keys = [(data.fingerprint, c.n, c.seed, settings) for c in cells]
    todo = [i for i, k in enumerate(keys) if k not in _CACHE]
    if todo:
        t0 = time.perf_counter()
        K, F = data.n_actions, data.folds
        pool = np.setdiff1d(np.arange(len(data.y)), data.test_idx)
        top = float(np.abs(data.y[pool]).max()) if len(pool) else 1.0
        bound = 1.1 * top if top > 0 else 1.0
        n = cells[todo[0]].n
        n_a = max(MIN_SIZE, int(round(n * (F - 1) / F / K)))
        arch_r = size_network(n_a, data.dimension, data.smoothness, data.ambient_dim, constants=constants,
                              output_bound=bound)
        arch_e = size_network(max(MIN_SIZE, int(round(n * (F - 1) / F))), data.dimension, data.smoothness,
                              data.ambient_dim, constants=constants)
        rtasks, etasks, plan = [], [], []
        for i in todo:
            c = cells[i]
            fit, val = data.cell_rows(c)
            rows = np.concatenate([fit, val])
            fold = _fold_of(len(rows), F)
            for f in range(F):
                tr = rows[fold != f]
                for a in range(K):
                    sel = tr[data.action[tr] == a]
                    rtasks.append(ReplicaTask(data.X[sel], data.y[sel], seed=_seed_int(c.seed, 101, f, a)))
                if data.propensity is None:
                    etasks.append(ReplicaTask(data.X[tr], data.action[tr], seed=_seed_int(c.seed, 202, f)))
            plan.append((i, rows, fold))
        rtrainer = BatchedTrainer(arch_r, train)
        rtrainer.fit(rtasks)
        efit = fit_stage("propensity", etasks, arch_e, train, K) if etasks else None
        X_test, a_test = data.X_test, data.action[data.test_idx]
        for j, (i, rows, fold) in enumerate(plan):
            m = len(rows)
            mu_oof, mu_test = np.zeros((m, K)), np.zeros((len(X_test), K))
            e_oof, e_test = np.zeros(m), np.zeros(len(X_test))
            for f in range(F):
                inside = fold == f
                Xf = data.X[rows[inside]]
                for a in range(K):
                    r = (j * F + f) * K + a
                    mu_oof[inside, a] = rtrainer.predict(Xf, replica=r)
                    mu_test[:, a] += rtrainer.predict(X_test, replica=r) / F
                if efit is not None:
                    q = j * F + f
                    P = efit.predict(Xf, q)
                    e_oof[inside] = P[np.arange(len(Xf)), data.action[rows[inside]]]
                    Pt = efit.predict(X_test, q)
                    e_test += Pt[np.arange(len(X_test)), a_test] / F
            if efit is None:
                e_oof, e_test = data.propensity[rows], data.propensity[data.test_idx]
            resid = data.y[rows] - mu_oof[np.arange(m), data.action[rows]]
            nu = _Nuisances(rows, mu_oof, e_oof, mu_test, e_test, float(np.mean(resid ** 2)),
                            (time.perf_counter() - t0) / len(todo), "logged" if efit is None else efit.path)
            _CACHE[keys[i]] = nu
            while len(_CACHE) > _CACHE_SIZE:
                _CACHE.popitem(last=False)
    out = []
    for k in keys:
        _CACHE.move_to_end(k)
        out.append(_CACHE[k])
    return out


def _scaled(G):
    """Scores centred per row and divided by their overall spread: the maximiser of sum_a pi_a G_a over
    policies is unchanged (sum_a pi_a = 1), the optimiser sees numbers of order one."""
    C = G - G.mean(axis=1, keepdims=True)
    s = float(np.std(C))
    return C / s if s > 0 else C


# ------------------------------------------------------------------------------------------ the learner
@register_learner
class PolicyLearner(Learner):
    """Two-stage off-policy learner of a policy campaign (see the module docstring).

    Parameters (``LearnerSpec("policy", params={...})``): ``method`` (one of :data:`METHODS`, default
    ``"dr"``), ``constants`` (sizing constants) and any :class:`manireg.nets.training.TrainConfig` field
    (used by every network of the cell). The default name is the method.
    """

    kind = "policy"
    batchable = True
    _own = ("method", "constants")

    @classmethod
    def allowed_params(cls):
        from manireg.nets.training import TrainConfig

        return cls._own + tuple(f.name for f in dataclasses.fields(TrainConfig))

    @classmethod
    def check_params(cls, params):
        super().check_params(params)
        m = params.get("method", "dr")
        if m not in METHODS:
            raise ValueError(f"the 'method' parameter of LearnerSpec('policy') must be one of {list(METHODS)}; got {m!r}.")

    @classmethod
    def default_name(cls, params) -> str:
        return str(params.get("method", "dr"))

    @property
    def method(self):
        return self.spec.params.get("method", "dr")

    def _configs(self):
        from manireg.nets.training import TrainConfig
        from manireg.theory.sizing import SizingConstants

        p = self.spec.params
        return (TrainConfig(**{k: v for k, v in p.items() if k not in self._own}),
                SizingConstants(**dict(p.get("constants") or {})))

    def resolve(self, context) -> dict:
        train, constants = self._configs()
        if self.method == "oracle" and context is not None and getattr(context, "mu", None) is None:
            raise ValueError("the 'oracle' policy learner needs the true reward functions and propensities "
                             "(synthetic data); leave it out for a table.")
        return {"method": self.method, "train": dataclasses.asdict(train), "constants": dataclasses.asdict(constants),
                "folds": getattr(context, "folds", None), "clip": getattr(context, "clip", None),
                "propensity_source": None if context is None else getattr(context, "propensity_source", None)}

    def cell_cost(self, n, data) -> float:
        train, _ = self._configs()
        K, F = getattr(data, "n_actions", 2), getattr(data, "folds", 2)
        width = 32.0
        return 6.0 * width * width * min(n, train.batch_size) * train.max_steps * (K * F + F + 1)

    def fit_policies(self, cells, data):
        """Per cell: the stage-1 nuisances, the greedy actions on the test rows and the stage-2 result."""
        from manireg.theory.sizing import size_network

        ns = {c.n for c in cells}
        if len(ns) != 1:
            raise ValueError(f"PolicyLearner.run: cells of one call must share n; got sizes {sorted(ns)}.")
        train, constants = self._configs()
        nuis = _stage1(cells, data, train, constants)
        K, clip = data.n_actions, data.clip
        if self.method == "direct":
            return [(nu, greedy_actions(nu.mu_test), None) for nu in nuis]
        from manireg.nets.training import ReplicaTask

        n_fit = cells[0].n - data.n_val(cells[0].n)
        arch = size_network(max(2, n_fit), data.dimension, data.smoothness, data.ambient_dim, constants=constants)
        tasks = []
        for c, nu in zip(cells, nuis):
            a, r = data.action[nu.rows], data.y[nu.rows]
            if self.method == "dr":
                G = dr_scores(nu.mu_oof, nu.e_oof, a, r, clip)
            elif self.method == "ipw":
                G = ipw_scores(nu.e_oof, a, r, K, clip)
            elif self.method == "oracle":
                G = dr_scores(data.mu[nu.rows], data.e[nu.rows, a], a, r, None)
            else:  # pragma: no cover - check_params guards the choice
                raise ValueError(f"unknown policy method {self.method!r}")
            G = _scaled(G)
            tasks.append(ReplicaTask(data.X[nu.rows[:n_fit]], G[:n_fit], data.X[nu.rows[n_fit:]], G[n_fit:],
                                     seed=_seed_int(c.seed, 303)))
        stage = fit_stage("policy", tasks, arch, train, K)
        out = []
        for i, nu in enumerate(nuis):
            out.append((nu, greedy_actions(stage.predict(data.X_test, i)), (stage, i, arch)))
        return out

    def run(self, cells, data) -> list:
        t0 = time.perf_counter()
        fitted = self.fit_policies(cells, data)
        spent = (time.perf_counter() - t0) / len(cells)
        test = data.test_idx
        a_test, r_test = data.action[test], data.y[test]
        rows = []
        for nu, act, st in fitted:
            G_test = dr_scores(nu.mu_test, nu.e_test, a_test, r_test, data.clip)
            value, se = policy_value(G_test, act)
            ov = overlap_diagnostics(nu.e_oof, data.clip)
            row = {"train_mse": None, "val_mse": nu.reward_mse, "test_mse": None, "test_mse_clean": None,
                   "steps": None, "best_step": None, "stop_reason": None, "late_best": None, "seconds": spent,
                   "n_parameters": None, "width": None, "depth": None, "width_multiplier": None, "precision": None,
                   "regret": None if data.mu is None else regret(act, data.mu[test]),
                   "policy_value": None if data.mu is None else float(np.mean(data.mu[test][np.arange(len(act)), act])),
                   "value_estimate": value, "value_se": se, "ess": ov.ess, "clipped_share": ov.clipped_share,
                   "overlap_json": json.dumps({"counts": ov.counts, "min": ov.min_propensity, "n": ov.n,
                                               "source": nu.propensity_path})}
            if st is not None:
                stage, i, arch = st
                r = stage.results[i]
                row.update(steps=r["steps"], best_step=r["best_step"], stop_reason=r["stop_reason"],
                           n_parameters=r["n_parameters"], width=int(arch.width), depth=int(arch.depth),
                           late_best=bool(r["best_step"] >= 0.8 * self._configs()[0].max_steps),
                           precision=r["precision"])
            rows.append(row)
        return rows


# ------------------------------------------------------------------------------------------ campaign
@dataclass
class PolicySpec:
    """Definition of a policy campaign.

    Parameters
    ----------
    bandit : LoggedBandit, optional
        The logged data (:func:`manireg.data.bandits.load_logged`, :func:`~manireg.data.bandits.logged_bandit`).
    X, action, reward, propensity : arrays, optional
        The logged data as arrays instead (``propensity``: of the taken action (n,), or of every action (n, K)).
    generator : dict, optional
        Synthetic data: keyword arguments of :func:`manireg.data.bandits.logged_bandit`
        (``{"manifold": "sphere", "n": 6000, "d": 2, "ambient_dim": 16, "n_actions": 3, ...}``).
    sizes, repeats, test_fraction, test_size, validation_fraction, seed, dimension, smoothness, name
        As in :class:`manireg.curves.sweep.CampaignSpec`.
    learners : list, optional
        ``LearnerSpec("policy", params={"method": ...})`` objects, method names (``"dr"``) or dicts. Default:
        dr, direct, ipw, and oracle when the truth is known.
    folds : int, default=2
        Cross-fitting folds of stage 1 (>= 2).
    clip : float or None, default=0.01
        Propensities below ``clip`` are raised to it in every weight (None: no clipping).
    estimate_propensity : bool or None, default=None
        Estimate the propensities with the softmax network even when the data carry logged ones. None:
        estimate for synthetic data from ``generator`` (so the campaign measures the whole two-stage method)
        and when nothing is logged; use logged propensities otherwise.
    """

    bandit: LoggedBandit | None = field(default=None, repr=False)
    X: np.ndarray | None = field(default=None, repr=False)
    action: np.ndarray | None = field(default=None, repr=False)
    reward: np.ndarray | None = field(default=None, repr=False)
    propensity: np.ndarray | None = field(default=None, repr=False)
    generator: dict | None = None
    sizes: list | None = None
    repeats: int = 5
    learners: list | None = None
    test_fraction: float = 0.2
    test_size: int | None = None
    validation_fraction: float = 0.2
    seed: int = 0
    dimension: float | None = None
    smoothness: float | None = None
    name: str = "policy"
    folds: int = DEFAULT_FOLDS
    clip: float | None = DEFAULT_CLIP
    dimension_source: str | None = None
    estimate_propensity: bool | None = None

    def to_dict(self) -> dict:
        return {"task": "policy", "generator": self.generator,
                "sizes": None if self.sizes is None else [int(v) for v in self.sizes], "repeats": self.repeats,
                "learners": None if self.learners is None else [_coerce_learner(l).to_dict() for l in self.learners],
                "test_fraction": self.test_fraction, "test_size": self.test_size,
                "validation_fraction": self.validation_fraction, "seed": self.seed, "dimension": self.dimension,
                "smoothness": self.smoothness, "name": self.name, "folds": self.folds, "clip": self.clip,
                "estimate_propensity": self.estimate_propensity}


def _coerce_learner(value) -> LearnerSpec:
    if isinstance(value, str) and value in METHODS:
        return LearnerSpec("policy", params={"method": value})
    spec = LearnerSpec.coerce(value)
    if spec.kind != "policy":
        raise ValueError(f"a policy campaign takes policy learners ({list(METHODS)}); got kind {spec.kind!r}.")
    return spec


@dataclass
class PolicyData(CampaignData):
    """:class:`CampaignData` of a policy campaign: ``y`` is the reward; plus actions, propensities and truth."""

    action: np.ndarray | None = field(default=None, repr=False)
    n_actions: int = 2
    action_names: list = field(default_factory=list)
    propensity: np.ndarray | None = field(default=None, repr=False)
    mu: np.ndarray | None = field(default=None, repr=False)
    e: np.ndarray | None = field(default=None, repr=False)
    folds: int = DEFAULT_FOLDS
    clip: float | None = DEFAULT_CLIP
    source: str = "arrays"
    min_propensity: float | None = None

    @property
    def propensity_source(self) -> str:
        return "estimated" if self.propensity is None else "logged"

    def metadata(self, spec=None) -> dict:
        meta = super().metadata(spec)
        meta.update(task="policy", n_actions=self.n_actions, action_names=list(self.action_names), folds=self.folds,
                    clip=self.clip, propensity_source=self.propensity_source, truth=self.mu is not None,
                    min_propensity=self.min_propensity,
                    optimal_value=None if self.mu is None else float(np.mean(self.mu[self.test_idx].max(axis=1))),
                    logged_overlap=None if self.e is None else overlap_diagnostics(
                        self.e[np.arange(len(self.action)), self.action][self.pool_idx], self.clip).to_dict())
        return meta


def prepare_policy(spec: PolicySpec) -> PolicyData:
    """Validate a :class:`PolicySpec` and build its :class:`PolicyData` (splits, sizes, d, s, fingerprint),
    including the check that every action has rows in every fold (:func:`check_fold_coverage`).

    Raises
    ------
    ValueError
        What is wrong, what is allowed, what was received and the fix (bad logged data, bad sizes, an oracle
        learner without the truth, an action missing from a fold, ...).
    """
    from manireg.geometry.neighbors import data_fingerprint

    owner = "PolicySpec"
    if not isinstance(spec, PolicySpec):
        raise ValueError(f"expected a PolicySpec; got {type(spec).__name__}.")
    given = [k for k in ("bandit", "X", "generator") if getattr(spec, k) is not None]
    if len(given) != 1:
        raise ValueError(f"{owner}: give exactly one of bandit=, X= (with action= and reward=) or generator=; got "
                         f"{given or 'none'}.")
    d, s, d_source = spec.dimension, spec.smoothness, spec.dimension_source or "given"
    if spec.generator is not None:
        if not isinstance(spec.generator, dict):
            raise ValueError(f"{owner}.generator must be a dict of logged_bandit arguments; got {spec.generator!r}.")
        bandit = logged_bandit(**spec.generator)
    elif spec.bandit is not None:
        bandit = spec.bandit
    else:
        if spec.action is None or spec.reward is None:
            raise ValueError(f"{owner}: X needs action= and reward= (one entry per row).")
        X, codes, r, p, names = check_logged(spec.X, spec.action, spec.reward, spec.propensity, owner=owner)
        bandit = LoggedBandit(X=X, action=codes, reward=r, propensity=p, n_actions=len(names), action_names=names)
    if not isinstance(bandit, LoggedBandit):
        raise ValueError(f"{owner}.bandit must be a LoggedBandit; got {type(bandit).__name__}.")
    X, codes, r, p, names = check_logged(bandit.X, bandit.action, bandit.reward, bandit.propensity, owner=owner,
                                         action_names=bandit.action_names)
    estimate = spec.estimate_propensity
    if estimate is None:
        estimate = spec.generator is not None
    if estimate:
        p = None
    elif p is None and spec.estimate_propensity is False:
        raise ValueError(f"{owner}: estimate_propensity=False needs logged propensities; the data carry none.")
    if bandit.dimension is not None and d is None:
        d, d_source = float(bandit.dimension), "generator"
    if bandit.smoothness is not None and s is None:
        s = float(bandit.smoothness)
    N, D = X.shape
    repeats = check_int(spec.repeats, "repeats", owner=owner, low=1)
    seed = check_int(spec.seed, "seed", owner=owner, low=0)
    vf = check_float(spec.validation_fraction, "validation_fraction", owner=owner, low=0.0, high=0.5, low_open=True)
    folds = check_int(spec.folds, "folds", owner=owner, low=2, high=10)
    clip = None if spec.clip is None else check_float(spec.clip, "clip", owner=owner, low=0.0, high=1.0 / len(names),
                                                      low_open=True)
    test_size, sizes = check_sizes(spec.sizes, N, test_fraction=spec.test_fraction, test_size=spec.test_size, owner=owner)
    truth = bandit.mu is not None and bandit.e is not None
    if spec.learners is None:
        learners = [_coerce_learner(m) for m in (METHODS if truth else METHODS[:3])]
    else:
        learners = [_coerce_learner(l) for l in spec.learners]
    if not learners:
        raise ValueError(f"the 'learners' parameter of {owner} is empty; pass e.g. ['dr', 'direct'].")
    names_l = [l.name for l in learners]
    dup = sorted({n for n in names_l if names_l.count(n) > 1})
    if dup:
        raise ValueError(f"the 'learners' parameter of {owner} has duplicate name(s) {dup}; give each its own name.")
    if not truth and any(l.params.get("method") == "oracle" for l in learners):
        raise ValueError(f"{owner}: the 'oracle' learner needs the true reward functions and propensities (synthetic "
                         "data); leave it out for a table.")
    if d is None:
        from manireg.geometry.dimension import estimate_dimension

        d, d_source = float(estimate_dimension(X).consensus), "estimated"
    d = check_float(d, "dimension", owner=owner, low=1.0, high=float(D))
    s = 1.0 if s is None else check_float(s, "smoothness", owner=owner, low=0.0, low_open=True)
    if not isinstance(spec.name, str) or not spec.name:
        raise ValueError(f"the 'name' parameter of {owner} must be a non-empty str; got {spec.name!r}.")
    parts = [X, r, codes.astype(np.float64)] + ([] if p is None else [p])
    fp = hashlib.sha256("".join(data_fingerprint(a) for a in parts).encode()).hexdigest()[:32]
    perm = np.random.default_rng(_seed_int(seed, 0)).permutation(N)
    data = PolicyData(X=X, y=r, f_clean=None, test_idx=np.sort(perm[:test_size]), pool_idx=perm[test_size:],
                      sizes=sizes, repeats=repeats, learners=learners, seed=seed, validation_fraction=vf, dimension=d,
                      smoothness=s, ambient_dim=D, fingerprint=fp, name=spec.name, dimension_source=d_source,
                      action=codes, n_actions=len(names), action_names=list(names), propensity=p,
                      mu=bandit.mu if truth else None, e=bandit.e if truth else None, folds=folds, clip=clip,
                      source=bandit.source, min_propensity=bandit.min_propensity)
    check_fold_coverage(data)
    return data


def check_fold_coverage(data: PolicyData) -> None:
    """Raise when an action has fewer than :data:`MIN_ROWS_PER_ACTION` rows in the training part of a fold of
    a cell (its reward model could not be fitted there); the message names the smallest such cell and the fix."""
    K, F = data.n_actions, data.folds
    for n in data.sizes:
        for rep in range(data.repeats):
            perm = np.random.default_rng(data.repeat_seed(rep)).permutation(len(data.pool_idx))
            rows = data.pool_idx[perm[:n]]
            fold = _fold_of(n, F)
            for f in range(F):
                counts = np.bincount(data.action[rows[fold != f]], minlength=K)
                if counts.min() < MIN_ROWS_PER_ACTION:
                    a = int(np.argmin(counts))
                    raise ValueError(
                        f"action '{data.action_names[a]}' is taken {int(counts[a])} time(s) in the training part of "
                        f"fold {f + 1} of {F} at size n={n} (repeat {rep}); each action needs at least "
                        f"{MIN_ROWS_PER_ACTION} rows there to fit its reward model. Use larger sizes (--sizes), fewer "
                        "folds (--folds), or merge rare actions.")


@dataclass
class PolicyResult(CampaignResult):
    """Rows of a policy campaign (:class:`CampaignResult` plus the policy metadata).

    :meth:`fit` fits the regret curve (metric ``"regret"``, no floor by default, no predicted exponent: see
    the module docstring); :meth:`overlap` sums the overlap diagnostics; :meth:`value_table` summarises the
    metrics per learner and size.
    """

    n_actions: int = 2
    action_names: list = field(default_factory=list)
    optimal_value: float | None = None
    folds: int = DEFAULT_FOLDS
    clip: float | None = DEFAULT_CLIP
    propensity_source: str = "estimated"
    truth: bool = False
    logged_overlap: dict | None = None

    def fit_settings(self, **kwargs) -> dict:
        kwargs.setdefault("metric", "regret")
        kwargs.setdefault("floor", None)
        return kwargs

    def fit(self, learner=None, **kwargs):
        """Regret exponent of one learner (:func:`manireg.curves.fitting.fit_exponent` on ``regret``)."""
        from manireg.curves.fitting import fit_exponent

        if learner is None and len(self.learners) > 1:
            return self.fit_all(**kwargs)
        return fit_exponent(self.rows, learner, **self.fit_settings(**kwargs))

    def fit_all(self, **kwargs):
        """Regret exponents of every learner whose regrets can be fitted; a learner whose regret is zero or
        missing in some cell is left out (see :meth:`unfitted`)."""
        from manireg.curves.fitting import ExponentTable, fit_exponent

        fits, self._unfitted = {}, {}
        for name in self.learners:
            try:
                fits[name] = fit_exponent(self.rows, name, **self.fit_settings(**kwargs))
            except ValueError as exc:
                self._unfitted[name] = " ".join(str(exc).split())
        return ExponentTable(fits=fits)

    def unfitted(self) -> dict:
        """Learners left out by the last :meth:`fit_all`, with the reason."""
        return dict(getattr(self, "_unfitted", {}))

    def value_table(self):
        """Mean over repeats per learner and n: regret, true value, value estimate and its standard error,
        effective sample size and clipped share."""
        ok = self.rows[self.rows["status"] == "ok"]
        cols = [c for c in ("regret", "policy_value", "value_estimate", "value_se", "ess", "clipped_share")]
        frame = ok[["learner", "n"] + cols].copy()
        for c in cols:
            frame[c] = frame[c].astype(float)
        out = frame.groupby(["learner", "n"], as_index=False).mean()
        out["repeats"] = frame.groupby(["learner", "n"]).size().to_numpy()
        return out

    def overlap(self, learner=None) -> dict:
        """Overlap per size: histogram counts of the propensities summed over repeats, the minimum, the mean
        effective sample size (and its share of n) and clipped share; from one learner's cells (they are the
        same for every learner of a cell)."""
        ok = self.rows[(self.rows["status"] == "ok") & self.rows["overlap_json"].notna()]
        if not len(ok):
            return {"sizes": [], "edges": list(np.linspace(0, 1, HIST_BINS + 1)), "counts": [], "min": [],
                    "ess": [], "ess_fraction": [], "clipped_share": [], "learner": learner}
        learner = learner or sorted(ok["learner"].unique())[0]
        ok = ok[ok["learner"] == learner]
        out = {"learner": learner, "edges": [float(v) for v in np.linspace(0, 1, HIST_BINS + 1)], "sizes": [],
               "counts": [], "min": [], "ess": [], "ess_fraction": [], "clipped_share": [],
               "source": None, "clip": self.clip}
        for n, grp in ok.groupby("n"):
            info = [json.loads(v) for v in grp["overlap_json"]]
            out["sizes"].append(int(n))
            out["counts"].append([int(v) for v in np.sum([i["counts"] for i in info], axis=0)])
            out["min"].append(float(min(i["min"] for i in info)))
            out["ess"].append(float(grp["ess"].astype(float).mean()))
            out["ess_fraction"].append(float(np.mean(grp["ess"].astype(float) / sum(info[0]["counts"]))))
            out["clipped_share"].append(float(grp["clipped_share"].astype(float).mean()))
            out["source"] = info[0].get("source")
        return out


class PolicyCampaign(Campaign):
    """A policy campaign bound to a result store (the policy counterpart of :class:`Campaign`).

    Parameters
    ----------
    spec : PolicySpec, optional
        Or its fields as keyword arguments.
    store : path or ResultStore, optional
        As in :class:`Campaign`; opened only after the settings and data are checked, so bad input never
        touches a store.

    Examples
    --------
    >>> camp = PolicyCampaign(generator={"manifold": "sphere", "n": 3000, "d": 2, "ambient_dim": 8},
    ...                       sizes=[400, 800], repeats=2, test_size=1500)            # doctest: +SKIP
    >>> result = camp.run()                                                            # doctest: +SKIP
    >>> result.value_table()                                                           # doctest: +SKIP
    """

    def __init__(self, spec=None, *, store=None, **kwargs):
        from manireg.curves.store import ResultStore

        if spec is None:
            spec = PolicySpec(**kwargs)
        elif kwargs:
            raise ValueError(f"PolicyCampaign: pass a PolicySpec or keyword fields, not both; got spec and {sorted(kwargs)}.")
        if not isinstance(spec, PolicySpec):
            raise ValueError(f"PolicyCampaign: spec must be a PolicySpec; got {type(spec).__name__}.")
        self.spec = spec
        self.data = prepare_policy(spec)
        self._cells = expand(self.data)  # resolves every learner before the store opens
        if store is None:
            store = os.path.join(tempfile.mkdtemp(prefix="manireg-policy-"), "campaign.sqlite")
        self.store = store if isinstance(store, ResultStore) else ResultStore(store)

    def noise_estimate(self):
        """Not used by policy campaigns (regret has no noise floor): None."""
        return None

    def result(self, summary=None) -> PolicyResult:
        rows = self.store.rows(self.data.name, keys=[c.key for c in self.cells()])
        return _policy_result(rows, self.store.path, {**self.data.metadata(self.spec)}, summary)

    @staticmethod
    def from_store(path, campaign=None) -> PolicyResult:
        """Reload a policy campaign's rows and metadata from a store without training."""
        base = Campaign.from_store(path, campaign)
        from manireg.curves.store import ResultStore

        meta = ResultStore(os.fspath(path)).campaign_meta(base.name)
        if meta.get("task") != "policy":
            raise ValueError(f"campaign {base.name!r} in {os.fspath(path)!r} is not a policy campaign; open it with "
                             "Campaign.from_store (manireg report).")
        return _policy_result(base.rows, base.store_path, meta, None)

    def __repr__(self):
        return (f"PolicyCampaign(name={self.data.name!r}, sizes={self.data.sizes}, repeats={self.data.repeats}, "
                f"learners={[l.name for l in self.data.learners]}, store={self.store.path!r})")


def _policy_result(rows, store_path, meta, summary):
    for c in POLICY_COLUMNS[:-1]:
        if c in rows:
            rows[c] = rows[c].astype(float)
    return PolicyResult(rows=rows, spec=meta.get("spec") or {}, dimension=meta.get("dimension"),
                        smoothness=meta.get("smoothness"), ambient_dim=meta.get("ambient_dim"),
                        name=meta.get("campaign"), store_path=store_path, noise_variance=None, noise_estimate=None,
                        dimension_source=meta.get("dimension_source", "given"), summary=dict(summary or {}),
                        n_actions=meta.get("n_actions", 2), action_names=meta.get("action_names", []),
                        optimal_value=meta.get("optimal_value"), folds=meta.get("folds", DEFAULT_FOLDS),
                        clip=meta.get("clip"), propensity_source=meta.get("propensity_source", "estimated"),
                        truth=bool(meta.get("truth")), logged_overlap=meta.get("logged_overlap"))


# ------------------------------------------------------------------------------------------ views
@dataclass
class PolicyMap(ResultMixin):
    """A learned policy on a 2-D view of the test covariates (first two principal components).

    Attributes
    ----------
    view : (m, 2) array; actions : (m,) chosen actions; optimal : (m,) optimal actions or None;
    learner, n, repeat : which cell; action_names : labels; explained : variance share of the two components.
    """

    view: np.ndarray = field(repr=False)
    actions: np.ndarray = field(repr=False)
    optimal: np.ndarray | None = field(repr=False)
    learner: str
    n: int
    repeat: int
    action_names: list
    explained: float
    agreement: float | None = None
    _skip_in_dict = ("view", "actions", "optimal")


def _pca2(X):
    Xc = X - X.mean(axis=0)
    U, S, Vt = np.linalg.svd(Xc, full_matrices=False)
    k = min(2, Vt.shape[0])
    V = Xc @ Vt[:k].T
    if k < 2:
        V = np.column_stack([V, np.zeros(len(V))])
    tot = float(np.sum(S ** 2))
    return V, float(np.sum(S[:k] ** 2) / tot) if tot > 0 else 1.0


def learned_policy(campaign: PolicyCampaign, learner: str = "dr", n: int | None = None, repeat: int = 0,
                   max_points: int = 2000) -> PolicyMap:
    """Refit one cell (deterministic: the same numbers as its stored row) and return its greedy policy on
    up to ``max_points`` test rows in the 2-D principal-component view."""
    cells = [c for c in campaign.cells() if c.learner.name == learner]
    if not cells:
        raise ValueError(f"learned_policy: the campaign has no learner {learner!r}; it has "
                         f"{sorted({c.learner.name for c in campaign.cells()})}.")
    n = max(c.n for c in cells) if n is None else int(n)
    pick = [c for c in cells if c.n == n and c.repeat == repeat]
    if not pick:
        raise ValueError(f"learned_policy: no cell of {learner!r} at n={n}, repeat={repeat}; sizes are "
                         f"{sorted({c.n for c in cells})}.")
    data = campaign.data
    learner_obj = PolicyLearner(pick[0].learner)
    _, actions, _ = learner_obj.fit_policies(pick, data)[0]
    m = min(int(max_points), len(actions))
    view, explained = _pca2(data.X_test[:m])
    optimal = None if data.mu is None else greedy_actions(data.mu[data.test_idx][:m])
    agree = None if optimal is None else float(np.mean(optimal == actions[:m]))
    return PolicyMap(view=view, actions=actions[:m], optimal=optimal, learner=learner, n=n, repeat=repeat,
                     action_names=list(data.action_names), explained=explained, agreement=agree)


def demo_scenario(quick: bool = False) -> dict:
    """Keyword arguments of :class:`PolicySpec` for the built-in synthetic scenario: three actions with
    Lipschitz (s = 1) reward functions on a 2-dimensional curved surface in R^16, logging policy with
    minimum propensity 0.05, test regret on 4,000 rows."""
    gen = {"manifold": "graph_manifold", "n": 8000, "d": 2, "ambient_dim": 16, "n_actions": 3, "smoothness": 1.0,
           "noise_std": 0.5, "min_propensity": 0.05, "seed": 0}
    sizes = [250, 500, 1000, 2000, 4000]
    repeats = 3
    params = {}
    if quick:
        gen["n"] = 4000
        sizes, repeats = [200, 400, 800], 2
        params = {"max_steps": 150, "min_steps": 50}
    learners = [LearnerSpec("policy", params={"method": m, **params}) for m in METHODS]
    return {"generator": gen, "sizes": sizes, "repeats": repeats, "test_size": 2000 if quick else 4000,
            "learners": learners, "name": "policy-demo"}
