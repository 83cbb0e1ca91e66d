"""Rate tracking: the same learners over targets of several s and manifolds of several d."""

import warnings

import numpy as np
import pytest

from manireg.curves.tracking import campaign_name, predicted_band, track_rates


def test_predicted_band_per_learner():
    # net: 2s/(2s+d) (Stone 1982); kNN: 2 min(s,1)/(2 min(s,1)+d) up to 2 min(s,2)/(...) for s > 1
    # (Györfi, Kohler, Krzyżak, Walk 2002, Thm 6.2 and Ch. 6)
    assert predicted_band("net", 2, 2.0) == pytest.approx((2 / 3, 2 / 3))
    assert predicted_band("knn", 2, 2.0) == pytest.approx((0.5, 2 / 3))
    assert predicted_band("knn", 3, 0.5) == pytest.approx((0.25, 0.25))
    assert campaign_name(2, 1.0) == "track-d2-s1" and campaign_name(3, 0.5) == "track-d3-s0.5"


def test_tiny_knn_grid_moves_with_s_and_d(tmp_path):
    # kNN's exponent rises with s and falls with d (Györfi et al. 2002, Thm 6.2: 2s/(2s+d) for s <= 1). On this
    # grid the predicted gaps are 0.3 (s, d = 2), 0.26 (s, d = 3), 0.05-0.1 (d); measured on a run of this
    # test: 0.18-0.37 (d = 2), 0.15-0.29 (d = 3). Each comparison is between two exponents whose intervals
    # are about +-0.02 wide.
    store = str(tmp_path / "t.sqlite")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # fewer than 5 repeats warns
        res = track_rates(dimensions=(2, 3), smoothness=(0.25, 1.0), learners=("knn",), sizes=(150, 300, 600, 1200),
                          repeats=3, test_size=400, store=store)
    frame = res.to_frame()
    assert len(frame) == 4 and set(frame["campaign"]) == {"track-d2-s0.25", "track-d2-s1", "track-d3-s0.25", "track-d3-s1"}
    e = {(r["dimension"], r["smoothness"]): r["exponent"] for r in res.table}
    assert e[(2, 1.0)] > e[(2, 0.25)] and e[(3, 1.0)] > e[(3, 0.25)]
    assert e[(2, 0.25)] > e[(3, 0.25)] and e[(2, 1.0)] > e[(3, 1.0)]
    f = res.slopes["knn"]
    assert f["n_points"] == 4 and f["interval"][0] <= f["slope"] <= f["interval"][1]
    assert "slope of measured on predicted" in str(res)
    d = res.to_dict()
    assert d["slopes"]["knn"]["n_points"] == 4 and len(d["table"]) == 4
    # running again resumes from the store: same numbers
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        again = track_rates(dimensions=(2, 3), smoothness=(0.25, 1.0), learners=("knn",), sizes=(150, 300, 600, 1200),
                            repeats=3, test_size=400, store=store)
    assert [r["exponent"] for r in again.table] == [r["exponent"] for r in res.table]
    from manireg.plots.tracking import plot_rate_tracking

    fig = plot_rate_tracking(res)
    assert len(fig.axes) == 1 and fig.axes[0].get_xlabel() == "predicted exponent"


def test_tracking_refuses_bad_grids():
    with pytest.raises(ValueError, match="'manifold' parameter"):
        track_rates(manifold="cube")
    with pytest.raises(ValueError, match="'smoothness' parameter"):
        track_rates(smoothness=(0.0, 1.0))
