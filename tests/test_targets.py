"""Targets of stated Hölder order."""

import numpy as np
import pytest

from manireg.data import holder_target, make_regression, sphere


def _quotients(f, s, beta, rng, n=4000, scales=(1e-1, 1e-2, 1e-3)):
    """max |f(a) - f(b)| / |a - b|^beta over random pairs at each scale (Hölder quotient, by definition)."""
    out = []
    for h in scales:
        a = rng.uniform(0, 1, (n, f.n_coords))
        dirs = rng.standard_normal((n, f.n_coords))
        dirs *= h / np.linalg.norm(dirs, axis=1, keepdims=True)
        b = a + dirs
        out.append(np.max(np.abs(f(a) - f(b)) / h**beta))
    return np.array(out)


@pytest.mark.parametrize("s", [0.3, 0.5, 0.8])
@pytest.mark.parametrize("kind", ["lacunary", "bumps"])
def test_holder_quotient_bounded_at_stated_order(s, kind):
    # definition of Hölder continuity of order s <= 1: |f(a) - f(b)| <= L |a - b|^s
    rng = np.random.default_rng(0)
    f = holder_target(2, s, kind=kind, seed=1)
    q = _quotients(f, s, s, rng)
    assert q[-1] <= 3 * q[0]  # bounded as the scale shrinks (it would grow like h^(s - beta) otherwise)
    # and the order is sharp for the lacunary series: with beta > s the quotient grows as the scale shrinks
    if kind == "lacunary":
        q_hi = _quotients(f, s, s + 0.4, rng)
        assert q_hi[-1] > 3 * q_hi[0]


def test_higher_order_target_derivative_holder():
    # for 1 < s < 2, f is C^1 with an (s - 1)-Hölder gradient: test the difference quotient of the
    # directional derivative (finite differences at a scale far below the pair distance)
    s = 1.5
    f = holder_target(1, s, seed=2)
    rng = np.random.default_rng(1)
    eps = 1e-7

    def deriv(z):
        return (f(z + eps) - f(z - eps)) / (2 * eps)

    qs = []
    for h in (1e-1, 1e-2, 1e-3):
        a = rng.uniform(0, 1, (3000, 1))
        qs.append(np.max(np.abs(deriv(a) - deriv(a + h)) / h ** (s - 1)))
    assert max(qs) < 4 * min(qs)


def test_regression_sample_carries_truth():
    samp = sphere(2000, 2, ambient_dim=6, seed=0)
    reg = make_regression(samp, 0.7, noise_std=0.2, seed=3)
    assert reg.smoothness == 0.7 and reg.noise_variance == pytest.approx(0.04)
    assert np.var(reg.y - reg.f_clean) == pytest.approx(0.04, rel=0.1)
    assert reg.X is samp.points
    assert 0.5 < np.std(reg.f_clean) < 2.0  # scaled to roughly unit spread
    again = make_regression(samp, 0.7, noise_std=0.2, seed=3)
    np.testing.assert_array_equal(reg.y, again.y)


def test_bad_target_arguments():
    with pytest.raises(ValueError, match="'smoothness' parameter"):
        holder_target(2, 0.0)
    with pytest.raises(ValueError, match="only for 0 < s <= 1"):
        holder_target(2, 1.5, kind="bumps")
    with pytest.raises(ValueError, match="'kind' parameter"):
        holder_target(2, 1.0, kind="wavy")
    f = holder_target(2, 1.0, seed=0)
    with pytest.raises(ValueError, match=r"shape \(n, 2\)"):
        f(np.zeros((3, 5)))
