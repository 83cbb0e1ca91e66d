"""Built-in scenarios: ready-made regression problems of our own design with known geometry."""

from __future__ import annotations

from .manifolds import rendered_objects
from .targets import RegressionSample, make_regression

__all__ = ["pebble_scenario"]


def pebble_scenario(n: int = 3000, *, d: int = 2, size: int = 32, smoothness: float = 1.5, noise_std: float = 0.1,
                    kind: str = "bumps", seed: int = 0) -> RegressionSample:
    """The demo problem: renderings of the pebble (``rendered_objects``, D = size^2) under ``d`` pose/light
    parameters, with a target of Hölder order ``smoothness`` on the parameters plus Gaussian noise.

    The target is the bump family by default (rough at every scale in every parameter direction, see
    :mod:`manireg.data.targets`); ``kind="lacunary"`` gives the earlier ridge target, which a network can
    learn at a one-dimensional rate.

    Theory for this problem: intrinsic dimension d, ambient D = size^2, predicted exponent 2s/(2s+d).
    """
    sample = rendered_objects(n, d, size=size, seed=seed)
    return make_regression(sample, smoothness, noise_std=noise_std, kind=kind, seed=seed + 1)
