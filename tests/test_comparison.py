"""compare_with_theory: the interval test against each learner's own reference rate, and read_out."""

from __future__ import annotations

import numpy as np
import pytest

from manireg.curves.comparison import (
    THEORY_AMBIENT,
    THEORY_INTRINSIC,
    THEORY_SHALLOWER,
    THEORY_STEEPER,
    THEORY_UNDETERMINED,
    compare_with_theory,
)
from manireg.curves.fitting import fit_exponent
from manireg.curves.readout import read_out
from manireg.geometry.summary import working_dimension
from manireg.curves.simulation import errors_to_rows, simulate_errors

SIZES = np.geomspace(100, 10_000, 7).round()


def fit_of(b, seed=0, learner="net", scatter=0.03, repeats=8):
    E = simulate_errors(runs=1, repeats=repeats, sizes=SIZES, exponent=b, scatter=scatter, seed=seed)[0]
    return fit_exponent(errors_to_rows(E, SIZES, learner=learner))


def test_verdicts_in_words():
    # 2s/(2s+d) at s = 1, d = 2 is 0.5; with D = 20 the ambient exponent is 2/22 = 0.091 (derived)
    assert compare_with_theory(fit_of(0.5), 2, 1.0, 20).verdict == THEORY_INTRINSIC
    assert compare_with_theory(fit_of(0.8), 2, 1.0, 20).verdict == THEORY_STEEPER
    assert compare_with_theory(fit_of(0.3), 2, 1.0, 20).verdict == THEORY_SHALLOWER
    assert compare_with_theory(fit_of(0.09), 2, 1.0, 20).verdict == THEORY_AMBIENT
    wide = fit_of(0.3, scatter=0.6, repeats=3)
    assert compare_with_theory(wide, 2, 1.0, 4).verdict == THEORY_UNDETERMINED  # touches 0.5 and 1/3


def test_predicted_interval_carries_d_interval_and_s_range():
    cmp = compare_with_theory(fit_of(0.5), 2, (1.0, 2.0), 20, dimension_interval=(1.5, 3.0))
    # 2s/(2s+d): lowest at s = 1, d = 3 (0.4), highest at s = 2, d = 1.5 (0.727) (derived)
    assert cmp.predicted_exponent == pytest.approx((0.4, 4 / 5.5))


def test_knn_band_for_smooth_targets():
    # kNN at s = 1.5, d = 2: band [2/(2+2), 3/(3+2)] = [0.5, 0.6] (Györfi et al. 2002, Ch. 6); an exponent of
    # 0.5 is consistent for kNN although it is below the network's 0.6
    fit = fit_of(0.5, learner="knn")
    assert compare_with_theory(fit, 2, 1.5, 20, learner_kind="knn").verdict == THEORY_INTRINSIC
    assert compare_with_theory(fit, 2, 1.5, 20, learner_kind="net").verdict == THEORY_SHALLOWER
    assert compare_with_theory(fit, 2, 1.5, learner_kind="kernel_ridge").verdict == THEORY_UNDETERMINED


def test_read_out_is_one_call():
    import pandas as pd

    rows = pd.concat([
        errors_to_rows(simulate_errors(runs=1, repeats=5, sizes=SIZES, exponent=0.5, scatter=0.03, floor=0.003,
                                       seed=1)[0], SIZES, learner="net"),
        errors_to_rows(simulate_errors(runs=1, repeats=5, sizes=SIZES, exponent=0.45, scatter=0.03, floor=0.003,
                                       seed=2)[0], SIZES, learner="knn"),
    ])
    out = read_out(rows, dimension=2.4, smoothness=1.5, ambient_dim=20, noise_estimate=0.003, floor="estimate")
    # one rounding of the working dimension, to two decimals and at least 1
    assert out.working_dimension == 2.4 == working_dimension(2.4) and working_dimension(0.3) == 1.0
    assert set(out.theory) == {"net", "knn"} and out.learner_kinds == {"net": "net", "knn": "knn"}
    assert out.theory["knn"].predicted_exponent[0] < out.theory["net"].predicted_exponent[0]
    assert set(out.extrapolation) == {"net", "knn"}
    assert out.plan is not None or out.plan_note
    assert "theory_verdict" in out.to_frame().columns
    # the clean metric has floor 0: "estimate" means no floor, and no test_mse column is needed
    clean = rows.rename(columns={"test_mse": "test_mse_clean"})
    out2 = read_out(clean, dimension=2, smoothness=1.5, metric="test_mse_clean", floor="estimate")
    assert out2.floor is None
    with pytest.raises(ValueError, match="needs the campaign's noise-variance estimate"):
        read_out(rows, dimension=2, smoothness=1.5, floor="estimate")
