"""Size grids of nets added to a campaign: names, settings, unchanged cell keys, clear errors (no training)."""

import pandas as pd
import pytest

from manireg.curves.campaign import Campaign
from manireg.curves.capacity import add_learners, capacity_by_depth, depth_groups, size_grid_learners, template_net
from manireg.curves.learners import LearnerSpec
from manireg.data import make_regression, sphere


@pytest.fixture
def campaign(tmp_path):
    sample = make_regression(sphere(200, 2, ambient_dim=4, seed=0), 1.0, noise_std=0.1, seed=1)
    net = LearnerSpec("net", params={"max_steps": 50, "constants": {"width_max": 64}})
    return Campaign.from_regression_sample(sample, sizes=[20, 40], repeats=2, learners=[net, "knn"],
                                           store=str(tmp_path / "s.sqlite"))


def test_size_grid_names_and_settings(campaign):
    tmpl = template_net(campaign.data.learners)
    grid = size_grid_learners(tmpl, [2, 0.5, 2], [1.5])
    # named like the command line's width sweep (LearnerSpec's default names), "-cd<c>" for another depth constant
    assert [l.name for l in grid] == ["net", "net-w2", "net-w0.5", "net-cd1.5", "net-w2-cd1.5", "net-w0.5-cd1.5"]
    for l in grid:
        assert l.params["max_steps"] == 50 and l.params["constants"]["width_max"] == 64
    assert grid[3].params["constants"]["c_depth"] == 1.5 and "c_depth" not in grid[0].params["constants"]
    with pytest.raises(ValueError, match="real > 0"):
        size_grid_learners(tmpl, [0])
    with pytest.raises(ValueError, match="net learner"):
        size_grid_learners(LearnerSpec("knn"), [2])
    assert template_net(["knn"]) is None


def test_add_learners_keeps_cell_keys_and_skips_equal_learners(campaign):
    before = {c.key: c.learner.name for c in campaign.cells()}
    added = add_learners(campaign, size_grid_learners(template_net(campaign.data.learners), [2]))
    assert [l.name for l in added] == ["net-w2"]
    after = {c.key: c.learner.name for c in campaign.cells()}
    assert set(before) < set(after) and all(after[k] == v for k, v in before.items())
    assert len(after) - len(before) == 2 * 2  # 2 sizes x 2 repeats of the new net
    assert [l["name"] for l in campaign.spec.to_dict()["learners"]] == ["net", "knn", "net-w2"]
    # equal settings under another name are the same learner: nothing added
    same = LearnerSpec("net", name="net-again", params=dict(campaign.data.learners[0].params))
    assert add_learners(campaign, [same, "knn"]) == []
    with pytest.raises(ValueError, match="already has a learner named 'knn'"):
        add_learners(campaign, [LearnerSpec("knn", params={"k": 3})])
    with pytest.raises(ValueError, match="does task 'classify'"):
        add_learners(campaign, ["knn_classifier"])
    with pytest.raises(ValueError, match="must be a Campaign"):
        add_learners(campaign.result(), [])


def test_depth_groups_without_cell_configurations():
    rows = pd.DataFrame([{"learner": l, "n": n, "repeat": r, "status": "ok", "test_mse": 1.0 / n * (1 + 0.1 * r)}
                         for l in ("net", "net-w2", "knn") for n in (50, 100) for r in range(3)])
    assert depth_groups(rows) == [("net, net-w2", ["net", "net-w2"])]
    ((label, ro),) = capacity_by_depth(rows)
    assert [r["n"] for r in ro.table] == [50.0, 100.0]
    assert depth_groups(rows[rows["learner"] == "knn"]) == []


def test_read_out_carries_the_capacity_read_out_only_for_a_width_sweep():
    # the one core read-out the CLI, the report and the panel format: a capacity read-out for nets that ran
    # two widths, none for a single width
    import numpy as np

    from manireg.curves.readout import read_out

    rng = np.random.default_rng(0)
    rows = pd.DataFrame([{"learner": l, "n": n, "repeat": r, "status": "ok",
                          "test_mse": (2.0 if l == "net" else 1.0) * n ** -0.6 * np.exp(rng.normal(0, 0.05))}
                         for l in ("net", "net-w2", "knn") for n in (50, 100, 200, 400, 800, 1600) for r in range(5)])
    ro = read_out(rows, dimension=2.0, smoothness=1.0, floor="none")
    ((label, cap),) = ro.capacity
    assert label == "net, net-w2" and all(r["best_multiplier"] == 2.0 for r in cap.table)
    assert read_out(rows[rows["learner"] != "net-w2"], dimension=2.0, smoothness=1.0, floor="none").capacity == []


def test_jackknife_se_without_two_finite_replicates_is_nan_and_silent():
    # the spread of a column with fewer than two finite leave-one-out values is undefined: NaN, no warning
    import warnings

    import numpy as np

    from manireg.curves.fitting import jackknife_se

    th = np.array([[1.0, np.nan, np.nan], [2.0, np.nan, 3.0], [3.0, np.nan, np.nan]])
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        se = jackknife_se(th)
    # column 0: sqrt((R-1)/R * sum of squared deviations) = sqrt(2/3 * 2) (closed form)
    assert se[0] == pytest.approx(np.sqrt(4 / 3)) and np.isnan(se[1]) and np.isnan(se[2])
