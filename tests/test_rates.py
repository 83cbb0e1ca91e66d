"""Rates: exponents against the REFERENCES.md table and the formulas they come from."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from manireg.theory import (
    ambient_approximation_parameters,
    ambient_exponent,
    approximation_parameters,
    implied_dimension,
    implied_smoothness,
    predicted_error,
    regression_exponent,
)

# Exponent table 2s/(2s+d), REFERENCES.md "Rates and sizing" (derived from Stone 1982).
TABLE = [
    (1, 1, 0.667), (1, 2, 0.500), (1, 4, 0.333), (1, 8, 0.200), (1, 20, 0.091),
    (2, 2, 0.667), (2, 4, 0.500), (2, 8, 0.333),
]


@pytest.mark.parametrize("s,d,expected", TABLE)
def test_regression_exponent_table(s, d, expected):
    assert regression_exponent(d, s) == pytest.approx(expected, abs=5e-4)


def test_vectorised_and_scalar_types():
    out = regression_exponent(np.array([1, 2, 4]), 1)
    assert isinstance(out, np.ndarray)
    np.testing.assert_allclose(out, [2 / 3, 0.5, 1 / 3])
    assert isinstance(regression_exponent(2, 1), float)


def test_ambient_exponent_hand_value():
    # 2s/(2s+D) with s=1, D=10: 2/12 (derived).
    assert ambient_exponent(10, 1) == pytest.approx(1 / 6)
    assert ambient_exponent(10, 1) < regression_exponent(2, 1)


def test_implied_values_by_hand():
    # d = 2s(1-b)/b: b=0.5, s=1 -> 2; s = b d/(2(1-b)): b=0.5, d=2 -> 1 (derived).
    assert implied_dimension(0.5, 1) == pytest.approx(2.0)
    assert implied_smoothness(0.5, 2) == pytest.approx(1.0)
    assert implied_dimension(0.2, 1) == pytest.approx(8.0)


def test_approximation_parameters_formula():
    # eps^(-d/s) log(1/eps): Yarotsky 2017 (ambient), Schmidt-Hieber arXiv:1908.00695 (manifold).
    p = approximation_parameters(0.01, 2, 1)
    assert p.nonzero_weights == pytest.approx(1e4 * np.log(100))
    assert p.depth == pytest.approx(np.log(100))
    q = ambient_approximation_parameters(0.01, 10, 1)
    assert q.nonzero_weights > p.nonzero_weights * 1e10
    assert set(p.to_dict()) >= {"eps", "depth", "nonzero_weights"}


def test_predicted_error():
    assert predicted_error(10_000, 2, 1) == pytest.approx(0.01)
    assert predicted_error(10_000, 2, 1, scale=3.0) == pytest.approx(0.03)
    assert predicted_error(10_000, 2, 1, log_power=3) == pytest.approx(0.01 * np.log(1e4) ** 3)
    out = predicted_error(np.array([100, 10_000]), 2, 1)
    np.testing.assert_allclose(out, [0.1, 0.01])


@settings(max_examples=50, deadline=None)
@given(d=st.floats(1, 200), s=st.floats(0.05, 20))
def test_exponent_in_unit_interval_and_inverses(d, s):
    b = regression_exponent(d, s)
    assert 0 < b < 1
    assert implied_dimension(b, s) == pytest.approx(d, rel=1e-8)
    assert implied_smoothness(b, d) == pytest.approx(s, rel=1e-8)


@settings(max_examples=30, deadline=None)
@given(d=st.floats(1, 50), extra=st.floats(0, 50), s=st.floats(0.05, 10))
def test_ambient_never_faster(d, extra, s):
    assert ambient_exponent(d + extra, s, d=d) <= regression_exponent(d, s) + 1e-15


def test_bad_inputs():
    with pytest.raises(ValueError, match=r"'d' parameter of regression_exponent must be a finite real >= 1; got 0.5"):
        regression_exponent(0.5, 1)
    with pytest.raises(ValueError, match=r"'s' parameter of regression_exponent must be a finite real > 0; got 0.0"):
        regression_exponent(2, 0)
    with pytest.raises(ValueError, match=r"'s' parameter of regression_exponent.*got -1.0"):
        regression_exponent(2, np.array([1.0, -1.0]))
    with pytest.raises(ValueError, match=r"'D' parameter of ambient_exponent must be >= the intrinsic dimension"):
        ambient_exponent(2, 1, d=3)
    with pytest.raises(ValueError, match=r"'exponent' parameter of implied_dimension must be a finite real in \(0, 1\)"):
        implied_dimension(1.0, 1)
    with pytest.raises(ValueError, match=r"'exponent' parameter of implied_smoothness"):
        implied_smoothness(0.0, 2)
    with pytest.raises(ValueError, match=r"'eps' parameter of approximation_parameters"):
        approximation_parameters(1.5, 2, 1)
    with pytest.raises(ValueError, match=r"'n' parameter of predicted_error must be a finite real >= 2; got 1.0"):
        predicted_error(1, 2, 1)
    with pytest.raises(ValueError, match=r"'d' parameter of regression_exponent.*nan"):
        regression_exponent(float("nan"), 1)


# Reference rates per learner: Györfi, Kohler, Krzyżak, Walk (2002), Thm 6.2 (kNN, s <= 1) and Ch. 6
# (local averaging for s > 1: bias of order h in general, h^min(s,2) with a smooth density, no boundary).
def test_reference_rates_per_learner():
    from manireg.theory import noise_estimate_bias_exponent, reference_rate

    net = reference_rate("net", 2, 1.5)
    assert net.low == net.high == pytest.approx(0.6)
    assert reference_rate("knn", 2, 1).low == reference_rate("knn", 2, 1).high == pytest.approx(0.5)
    band = reference_rate("knn", 2, 1.5)
    assert (band.low, band.high) == pytest.approx((0.5, 0.6))
    assert reference_rate("knn", 2, 3).high == pytest.approx(4 / 6)  # min(s, 2) = 2
    assert not reference_rate("kernel_ridge", 2, 1).stated
    with pytest.raises(ValueError, match="'learner_kind' parameter of reference_rate"):
        reference_rate("forest", 2, 1)
    # noise-estimate bias n^(-2 min(s,1)/d) (derived): s = 2 gives the s = 1 exponent
    assert noise_estimate_bias_exponent(4, 2) == pytest.approx(0.5) == noise_estimate_bias_exponent(4, 1)
