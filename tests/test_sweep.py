"""Campaign definition: cells, keys, nested splits, and clear errors for bad input."""

import numpy as np
import re

import pytest

from manireg.curves.learners import LearnerSpec
from manireg.curves.sweep import CampaignSpec, default_sizes, expand, prepare

TINY = {"max_steps": 30, "min_steps": 10, "patience_steps": 20, "eval_every": 10}


@pytest.fixture(scope="module")
def data():
    rng = np.random.default_rng(0)
    X = rng.normal(size=(300, 5))
    return X, np.sin(X[:, 0]) + 0.1 * rng.normal(size=300)


def _spec(data, **kw):
    X, y = data
    kw.setdefault("sizes", [20, 40, 80])
    kw.setdefault("repeats", 2)
    kw.setdefault("learners", [LearnerSpec("net", params=TINY), "knn"])
    kw.setdefault("dimension", 2.0)
    return CampaignSpec(X=X, y=y, **kw)


def test_cells_and_keys(data):
    cells = expand(_spec(data))
    assert len(cells) == 2 * 3 * 2
    assert len({c.key for c in cells}) == len(cells)
    # the repeat seed is shared across learners and sizes
    seeds = {(c.learner.name, c.n, c.repeat): c.seed for c in cells}
    assert seeds[("net", 20, 1)] == seeds[("knn", 80, 1)] != seeds[("net", 20, 0)]
    # keys are reproducible
    assert [c.key for c in expand(_spec(data))] == [c.key for c in cells]


def test_nested_training_sets_and_fixed_test_set(data):
    d = prepare(_spec(data))
    cells = {(c.n, c.repeat): c for c in expand(d) if c.learner.name == "knn"}
    for r in range(2):
        small = np.concatenate(d.cell_rows(cells[(20, r)]))
        big = np.concatenate(d.cell_rows(cells[(80, r)]))
        assert set(small) <= set(big)
        assert not set(big) & set(d.test_idx)
    assert len(d.test_idx) == 60
    fit, val = d.cell_rows(cells[(40, 0)])
    assert len(fit) == 32 and len(val) == 8


@pytest.mark.parametrize(
    "change",
    [
        {"learners": [LearnerSpec("net", params=dict(TINY, learning_rate=1e-2))]},
        {"learners": [LearnerSpec("net", params=dict(TINY, width_multiplier=2.0))]},
        {"seed": 1},
        {"data": True},
    ],
)
def test_changed_setting_changes_every_key(data, change):
    base = expand(_spec(data, learners=[LearnerSpec("net", params=TINY)]))
    change = dict(change)
    if change.pop("data", False):
        X, y = data
        new = expand(CampaignSpec(X=X, y=y + 1e-9, sizes=[20, 40, 80], repeats=2, dimension=2.0,
                               learners=[LearnerSpec("net", params=TINY)]))
    else:
        new = expand(_spec(data, **change))
    assert not {c.key for c in base} & {c.key for c in new}


def test_width_multiplier_names():
    assert LearnerSpec("net", params={"width_multiplier": 0.5}).name == "net-w0.5"
    assert LearnerSpec("net", params={"width_multiplier": 2}).name == "net-w2"
    assert LearnerSpec("net").name == "net"


def test_default_sizes_use_all_training_rows(data):
    d = prepare(_spec(data, sizes=None))
    assert d.sizes[-1] == 240 and d.sizes[0] == 64 and len(d.sizes) == 6
    assert default_sizes(100) == sorted(set(default_sizes(100)))


def test_sizes_larger_than_data(data):
    with pytest.raises(ValueError, match="size 500 but only 240 rows are left .* Use sizes <= 240"):
        prepare(_spec(data, sizes=[20, 500]))


def test_single_size(data):
    with pytest.raises(ValueError, match="at least 2 distinct sizes"):
        prepare(_spec(data, sizes=[50]))


def test_repeats_below_one(data):
    with pytest.raises(ValueError, match="'repeats' parameter of CampaignSpec must be an int >= 1; got 0"):
        prepare(_spec(data, repeats=0))


def test_unknown_learner(data):
    import manireg.curves.policy  # noqa: F401  (registers the policy kind)
    from manireg.curves.learners import LEARNER_KINDS

    known = ", ".join(repr(k) for k in sorted(LEARNER_KINDS))
    with pytest.raises(ValueError, match=re.escape(f"must be one of [{known}]; got 'forest'")):
        prepare(_spec(data, learners=["forest"]))


def test_unknown_learner_parameter():
    with pytest.raises(ValueError, match="unknown parameter.*'lr'"):
        LearnerSpec("net", params={"lr": 1e-3})


def test_duplicate_learner_names(data):
    with pytest.raises(ValueError, match="duplicate name"):
        prepare(_spec(data, learners=["knn", "knn"]))


def test_no_data():
    with pytest.raises(ValueError, match="no data; pass X and y"):
        prepare(CampaignSpec())


def test_generator_config():
    d = prepare(CampaignSpec(generator={"manifold": "sphere", "n": 200, "d": 2, "ambient_dim": 6,
                                     "smoothness": 1.0, "noise_std": 0.1, "seed": 0},
                          sizes=[20, 40], repeats=1, learners=["knn"]))
    assert d.dimension == 2.0 and d.ambient_dim == 6 and d.f_clean is not None and d.noise_variance == pytest.approx(0.01)


def test_dimension_estimated_when_not_given(data):
    d = prepare(_spec(data, dimension=None, learners=["knn"]))
    assert d.dimension_source == "estimated" and 1.0 <= d.dimension <= 5.0
