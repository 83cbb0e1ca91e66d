"""Helpers for the disk-campaign tests that worker processes must import by name."""

from __future__ import annotations

import os

from manireg.data.lazy import LazyTable


class DyingTable(LazyTable):
    """A table on disk whose reading process exits (as if killed) when asked for exactly ``die_at`` rows
    while the file ``flag`` exists: a worker that dies in the middle of a cell. With ``once``, the dying
    process removes the flag first, so the cell's next attempt succeeds."""

    flag = None
    die_at = None
    once = False

    def rows(self, indices, **kw):
        import numpy as np

        if self.flag and os.path.exists(self.flag) and np.asarray(indices).size == self.die_at:
            if self.once:
                try:
                    os.remove(self.flag)
                except FileNotFoundError:  # another worker removed it first
                    pass
            os._exit(3)
        return super().rows(indices, **kw)


def dying(table, flag, die_at, once=False):
    t = DyingTable.__new__(DyingTable)
    t.__dict__.update(table.__dict__)
    t.flag, t.die_at, t.once = str(flag), int(die_at), bool(once)
    return t
