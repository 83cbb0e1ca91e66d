import os

import matplotlib
import pytest

matplotlib.use("Agg")
# keep the suite's BLAS/torch thread use modest on small CI machines
os.environ.setdefault("OMP_NUM_THREADS", "2")


@pytest.fixture
def tmp_table(tmp_path):
    """Write a small CSV and return its path (features a, b, c; target y)."""
    import numpy as np
    import pandas as pd

    rng = np.random.default_rng(0)
    df = pd.DataFrame(rng.normal(size=(20, 3)), columns=["a", "b", "c"])
    df["y"] = df["a"] + rng.normal(scale=0.1, size=20)
    path = tmp_path / "table.csv"
    df.to_csv(path, index=False)
    return path


@pytest.fixture
def count_queries(monkeypatch):
    """Record the k of every exact neighbour query (after clearing the neighbour cache)."""
    from manireg.geometry import neighbors

    calls = []
    original = neighbors._exact

    def counting(points, k):
        calls.append(k)
        return original(points, k)

    monkeypatch.setattr(neighbors, "_exact", counting)
    neighbors.clear_cache()
    return calls
