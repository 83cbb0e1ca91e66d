"""Seed derivation: one function turns a seed and stream numbers into an independent integer seed."""

from __future__ import annotations

import numpy as np

__all__ = ["derive_seed"]


def derive_seed(*entropy) -> int:
    """A non-negative 63-bit integer seed derived from ``entropy`` (a seed followed by stream numbers).

    Different entropy tuples give statistically independent streams (``numpy.random.SeedSequence``);
    the same tuple always gives the same seed. ``derive_seed(seed, 1, r)`` is, for example, the seed of
    repeat ``r`` of a campaign seeded with ``seed``.
    """
    return int(np.random.SeedSequence([int(e) for e in entropy]).generate_state(1, dtype=np.uint64)[0] >> 1)
