"""Policy campaigns: the doubly robust estimator's properties, the baselines, the propensity network against
scikit-learn, a small campaign end to end, and bad logged data on the command line."""

import json
import math
import os

import numpy as np
import pandas as pd
import pytest

from manireg.cli import main
from manireg.curves.learners import LearnerSpec
from manireg.curves.policy import (METHODS, PolicyCampaign, clip_propensity, dr_scores, effective_sample_size,
                                   fit_stage, fit_stage_loop, greedy_actions, ipw_scores, learned_policy,
                                   overlap_diagnostics, policy_value, regret)
from manireg.data.bandits import check_logged, load_logged, logged_bandit, softmax

# Monte Carlo tolerances. S independent replications of the logged actions and rewards on fixed covariates.
# Unbiasedness: |mean estimate - truth| < 4 standard errors of the mean (two-sided false-failure probability
# 6e-5 under the central limit theorem). Interval coverage: the count of runs whose nominal 95% interval
# (estimate +- 1.96 se) covers the truth is Binomial(S, ~0.95); we require it to be at least
# S * 0.95 - 4 * sqrt(S * 0.95 * 0.05) (false-failure probability below 1e-4 at the nominal level).
S = 300
Z = 4.0


def _simulate(bandit, rng):
    e, mu = bandit.e, bandit.mu
    u = rng.random(len(e))[:, None]
    a = np.minimum((u > np.cumsum(e, axis=1)).sum(axis=1), e.shape[1] - 1)
    r = mu[np.arange(len(a)), a] + bandit.noise_std * rng.standard_normal(len(a))
    return a, r


@pytest.fixture(scope="module")
def bandit():
    return logged_bandit("sphere", 400, d=2, ambient_dim=6, n_actions=3, min_propensity=0.05, noise_std=1.0, seed=3)


def _dr_runs(bandit, mu_hat, e_hat, policy, seed=0):
    rng = np.random.default_rng(seed)
    est, cover = [], 0
    truth = float(np.mean(bandit.mu[np.arange(len(policy)), policy]))
    for _ in range(S):
        a, r = _simulate(bandit, rng)
        v, se = policy_value(dr_scores(mu_hat, e_hat[np.arange(len(a)), a], a, r), policy)
        est.append(v)
        cover += abs(v - truth) <= 1.96 * se
    est = np.asarray(est)
    t = abs(est.mean() - truth) / (est.std(ddof=1) / math.sqrt(S))
    return t, cover


def test_dr_value_unbiased_with_exact_nuisances_and_with_one_wrong(bandit):
    # Double robustness: unbiased when either the reward model or the propensities are right
    # (Robins, Rotnitzky, Zhao, JASA 1994; Dudík, Langford, Li, ICML 2011).
    policy = np.argmin(bandit.e, axis=1)  # the least-logged action: large weights, a demanding case
    mu_wrong = bandit.mu + 1.0 + 0.5 * np.sin(3 * bandit.X[:, :1])
    e_wrong = np.full_like(bandit.e, 1.0 / 3)
    min_cover = S * 0.95 - 4 * math.sqrt(S * 0.95 * 0.05)
    for mu_hat, e_hat in ((bandit.mu, bandit.e), (mu_wrong, bandit.e), (bandit.mu, e_wrong)):
        t, cover = _dr_runs(bandit, mu_hat, e_hat, policy)
        assert t < Z, t
        assert cover >= min_cover, cover
    # both wrong: biased, and the test sees it (so the checks above can fail)
    t, _ = _dr_runs(bandit, mu_wrong, e_wrong, policy)
    assert t > Z, t


def test_ipw_unbiased_with_true_propensities_and_variance_grows_as_overlap_shrinks():
    # IPW with the true propensities is unbiased (Horvitz-Thompson; Dudík, Langford, Li 2011); its variance
    # grows like the mean of 1/e, so it rises as the minimum propensity falls. Sample variances of S runs:
    # their ratio is F(S-1, S-1) under equal variances, 99.99% quantile about 1.56 at S = 300; we require
    # each step of shrinking overlap to raise the variance by more than that.
    variances = []
    for m in (1.0 / 3, 0.05, 0.005):
        b = logged_bandit("sphere", 400, d=2, ambient_dim=6, n_actions=3, min_propensity=m, noise_std=1.0, seed=3)
        policy = np.argmin(logged_bandit("sphere", 400, d=2, ambient_dim=6, n_actions=3, min_propensity=0.005,
                                         noise_std=1.0, seed=3).e, axis=1)
        truth = float(np.mean(b.mu[np.arange(400), policy]))
        rng = np.random.default_rng(1)
        est = []
        for _ in range(S):
            a, r = _simulate(b, rng)
            est.append(policy_value(ipw_scores(b.e[np.arange(400), a], a, r, 3), policy)[0])
        est = np.asarray(est)
        assert abs(est.mean() - truth) / (est.std(ddof=1) / math.sqrt(S)) < Z
        variances.append(est.var(ddof=1))
    assert variances[1] > 1.56 * variances[0] and variances[2] > 1.56 * variances[1], variances


def test_direct_method_with_true_rewards_has_zero_regret(bandit):
    # The optimal policy is argmax_a mu_a(x) (definition); a wrong reward model is not (the check can fail).
    assert regret(greedy_actions(bandit.mu), bandit.mu) == 0.0
    rough = bandit.mu + np.random.default_rng(0).normal(0, 1.0, bandit.mu.shape)
    assert regret(greedy_actions(rough), bandit.mu) > 0.05


def test_propensity_network_agrees_with_sklearn_logistic_regression():
    # A linear logging policy e = softmax(X B): scikit-learn's unpenalised multinomial LogisticRegression is the
    # maximum-likelihood fit of the right model. The softmax network should give close probabilities: mean
    # absolute difference below 0.06 on fresh points (measured 0.027-0.039 at n = 3000; common practice,
    # a constant-probability model is off by about 0.3). C=inf is scikit-learn's spelling of penalty=None.
    from sklearn.linear_model import LogisticRegression

    from manireg.nets.training import ReplicaTask, TrainConfig
    from manireg.theory.sizing import ArchitectureSpec

    rng = np.random.default_rng(0)
    B = rng.standard_normal((3, 3))
    X = rng.standard_normal((3000, 3))
    a = np.minimum((rng.random(3000)[:, None] > np.cumsum(softmax(X @ B), 1)).sum(1), 2)
    Xt = rng.standard_normal((1000, 3))
    P = LogisticRegression(C=np.inf, max_iter=2000).fit(X, a).predict_proba(Xt)
    arch = ArchitectureSpec(input_dim=3, depth=1, width=16, nonzero_budget=100)
    fit = fit_stage("propensity", [ReplicaTask(X, a, seed=0)], arch,
                    TrainConfig(max_steps=250, min_steps=250, learning_rate=1e-2), 3)
    Q = fit.predict(Xt, 0)
    assert np.allclose(Q.sum(axis=1), 1.0, atol=1e-5)
    assert np.abs(Q - P).mean() < 0.06
    assert np.abs(np.full_like(P, 1 / 3) - P).mean() > 0.15  # the tolerance separates a fit from no fit


def test_scores_clipping_and_overlap_diagnostics():
    e = np.array([0.005, 0.2, 0.5, 1.0])
    ec, share = clip_propensity(e, 0.01)
    assert ec[0] == 0.01 and share == 0.25
    assert effective_sample_size(np.ones(7)) == pytest.approx(7.0)  # Kish: equal weights give n
    ov = overlap_diagnostics(e, 0.01)
    assert sum(ov.counts) == 4 and ov.min_propensity == 0.005 and ov.clipped_share == 0.25
    G = dr_scores(np.zeros((4, 2)), e, np.array([0, 1, 0, 1]), np.ones(4), clip=0.01)
    assert G[0, 0] == pytest.approx(100.0) and G[0, 1] == 0.0


def test_stage_loop_is_the_fallback_and_seeded():
    from manireg.nets.training import ReplicaTask, TrainConfig
    from manireg.theory.sizing import ArchitectureSpec

    rng = np.random.default_rng(0)
    X = rng.standard_normal((60, 2))
    G = rng.standard_normal((60, 3))
    arch = ArchitectureSpec(input_dim=2, depth=1, width=8, nonzero_budget=20)
    cfg = TrainConfig(max_steps=20, min_steps=0, eval_every=5)
    f1 = fit_stage_loop("policy", [ReplicaTask(X, G, seed=4)], arch, cfg, 3)
    f2 = fit_stage_loop("policy", [ReplicaTask(X, G, seed=5), ReplicaTask(X, G, seed=4)], arch, cfg, 3)
    assert np.array_equal(f1.predict(X, 0), f2.predict(X, 1))  # a replica does not depend on its neighbours
    auto = fit_stage("policy", [ReplicaTask(X, G, seed=4)], arch, cfg, 3)
    assert auto.path in ("batched", "loop")
    with pytest.raises(ValueError, match="kind"):
        fit_stage("value", [], arch, cfg, 3)


QUICK = {"max_steps": 20, "min_steps": 0, "eval_every": 5}


@pytest.fixture(scope="module")
def finished(tmp_path_factory):
    store = str(tmp_path_factory.mktemp("policy") / "p.sqlite")
    kw = dict(generator={"manifold": "sphere", "n": 900, "d": 2, "ambient_dim": 6, "n_actions": 3, "seed": 2,
                         "min_propensity": 0.05},
              sizes=[120, 240], repeats=2, test_size=300,
              learners=[LearnerSpec("policy", params={"method": m, **QUICK}) for m in METHODS])
    camp = PolicyCampaign(store=store, **kw)
    result = camp.run(progress=False)
    return camp, result, store, kw


def test_policy_campaign_runs_resumes_and_reloads(finished):
    camp, result, store, kw = finished
    rows = result.rows
    assert len(rows) == 16 and set(rows["status"]) == {"ok"}
    assert (rows["regret"] >= 0).all() and rows["value_se"].gt(0).all()
    assert rows["overlap_json"].map(lambda s: sum(json.loads(s)["counts"])).isin([120, 240]).all()
    # the learners of one cell share the cross-fitted nuisances: same overlap numbers
    ess = rows.pivot_table(index=["n", "repeat"], columns="learner", values="ess")
    assert np.allclose(ess["dr"], ess["ipw"]) and np.allclose(ess["dr"], ess["oracle"])
    again = PolicyCampaign(store=store, **kw)
    assert again.progress()["remaining"] == 0
    reloaded = PolicyCampaign.from_store(store)
    assert reloaded.truth and reloaded.n_actions == 3
    pd.testing.assert_frame_equal(reloaded.value_table(), result.value_table())
    assert set(result.overlap()["sizes"]) == {120, 240}
    pm = learned_policy(camp, "dr", n=240, repeat=0, max_points=200)
    assert pm.view.shape == (200, 2) and 0 <= pm.agreement <= 1


def test_policy_report_sections(finished, tmp_path):
    from manireg.plots.policy import policy_sections
    from manireg.report import write_report

    _, result, _, _ = finished
    fits = result.fit_all(n_boot=50)
    sections = policy_sections(result, fits)
    paths = write_report(str(tmp_path), "policy", sections, {"policy": True}, save_png=False)
    text = open(paths["html"], encoding="utf-8").read()
    assert "Regret" in text and "Overlap diagnostics" in text and "No reference rate" in text


def _write(tmp_path, frame, name="logged.csv"):
    path = tmp_path / name
    frame.to_csv(path, index=False)
    return str(path)


def _logged_frame(n=400, seed=0):
    b = logged_bandit("sphere", n, d=2, ambient_dim=4, n_actions=3, seed=seed)
    frame = pd.DataFrame(b.X, columns=[f"x{j}" for j in range(4)])
    frame["act"] = np.array(["a", "b", "c"])[b.action]
    frame["rew"] = b.reward
    frame["prop"] = b.propensity
    for k in range(3):
        frame[f"p{k}"] = b.e[:, k]
    return frame


def test_load_logged_reads_actions_rewards_and_propensities(tmp_path):
    frame = _logged_frame()
    path = _write(tmp_path, frame)
    one = load_logged(path, action="act", reward="rew", propensity="prop", drop=["p0", "p1", "p2"])
    allp = load_logged(path, action="act", reward="rew", propensity=["p0", "p1", "p2"], drop=["prop"])
    assert one.action_names == ["a", "b", "c"] and one.X.shape == (400, 4)
    assert np.allclose(one.propensity, allp.propensity) and np.allclose(one.propensity, frame["prop"])
    assert load_logged(path, action="act", reward="rew", drop=["prop", "p0", "p1", "p2"]).propensity is None


@pytest.mark.parametrize("case, pattern", [
    ("one_action", "one action"),
    ("nan_reward", "NaN"),
    ("prop_out", r"outside \(0, 1\]"),
    ("prop_sum", "sum to one"),
    ("rare_action", "fold"),
])
def test_bad_logged_data_exits_2_with_one_line_and_keeps_the_store(case, pattern, tmp_path, finished, capsys):
    _, _, store, _ = finished
    from manireg.curves.store import ResultStore

    before = len(ResultStore(store))
    frame = _logged_frame()
    props = ["--propensity", "prop"]
    if case == "one_action":
        frame["act"] = "a"
    elif case == "nan_reward":
        frame.loc[5, "rew"] = np.nan
    elif case == "prop_out":
        frame.loc[3, "prop"] = 1.5
    elif case == "prop_sum":
        frame.loc[7, "p0"] += 0.2
        props = ["--propensity", "p0", "p1", "p2"]
    elif case == "rare_action":
        frame.loc[:, "act"] = np.where(np.arange(len(frame)) % 2, "a", "b")
        frame.loc[[0, 2, 4], "act"] = "c"
    path = _write(tmp_path, frame)
    drop = [c for c in ("prop", "p0", "p1", "p2") if c not in props]
    code = main(["policy", path, "--action", "act", "--reward", "rew", *props, "--drop", *drop, "--store", store,
                 "--sizes", "100", "200", "--dimension", "2", "--out", str(tmp_path / "out"), "--quiet"])
    err = capsys.readouterr().err.strip()
    assert code == 2
    assert len(err.splitlines()) == 1 and err.startswith("manireg policy: error:")
    assert __import__("re").search(pattern, err), err
    assert len(ResultStore(store)) == before


def test_check_logged_and_campaign_arguments():
    X = np.random.default_rng(0).standard_normal((50, 2))
    with pytest.raises(ValueError, match="one entry per row"):
        check_logged(X, np.zeros(10), np.zeros(50))
    with pytest.raises(ValueError, match="oracle"):
        PolicyCampaign(X=X, action=np.arange(50) % 2, reward=np.zeros(50), learners=["oracle"], sizes=[20, 30],
                       dimension=2)
    with pytest.raises(ValueError, match="method"):
        LearnerSpec("policy", params={"method": "greedy"})
