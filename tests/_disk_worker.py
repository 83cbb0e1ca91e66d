"""Helpers for the disk-campaign tests that worker processes must import by name."""

from __future__ import annotations

import os

from manireg.data.lazy import LazyTable


class DyingTable(LazyTable):
    """A table on disk whose reading process exits (as if killed) when asked for exactly ``die_at`` rows
    while the file ``flag`` exists: a worker that dies in the middle of a cell."""

    flag = None
    die_at = None

    def rows(self, indices):
        import numpy as np

        if self.flag and os.path.exists(self.flag) and np.asarray(indices).size == self.die_at:
            os._exit(3)
        return super().rows(indices)


def dying(table, flag, die_at):
    t = DyingTable.__new__(DyingTable)
    t.__dict__.update(table.__dict__)
    t.flag, t.die_at = str(flag), int(die_at)
    return t
