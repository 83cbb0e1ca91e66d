"""Synthetic data sets of any size written to disk chunk by chunk (never the whole array in memory).

:func:`write_synthetic` draws a manifold sample and a Hölder target block by block and appends each block
to an ``.npy``, ``.parquet`` or ``.zarr`` file. The manifold's fixed parts (the random embedding into R^D,
the waves of the graph manifold, the target function) are drawn once from ``seed``; each block draws only
its own intrinsic coordinates and noise, from a seed of its own (``SeedSequence([seed, 2, block])``). So a
file is a function of ``(manifold, n, parameters, seed, chunk_rows)``, and its rows are i.i.d. draws from
one manifold and one target, whatever its size.

Layouts (read back with :func:`manireg.data.open_table` or :func:`manireg.data.load_table`):

* ``.npy``: one 2-D array, the features in columns ``c0..c{D-1}`` and, with ``target=True``, the target in the
  last column ``c{D}`` (pass ``target="c{D}"`` or ``-1`` when reading);
* ``.parquet``: columns ``x0..x{D-1}`` and ``y``; one row group per block;
* ``.zarr``: a group with arrays ``X`` (n, D) chunked by blocks and ``y`` (n,).
"""

from __future__ import annotations

import math
import os
import time
from dataclasses import dataclass

import numpy as np

from .._results import ResultMixin
from .._validation import check_choice, check_float, check_int

__all__ = ["DiskSample", "write_synthetic", "WRITABLE_MANIFOLDS"]

WRITABLE_MANIFOLDS = ("sphere", "torus", "swiss_roll", "helix", "graph_manifold", "rendered_objects")


@dataclass
class DiskSample(ResultMixin):
    """What :func:`write_synthetic` wrote: where, how much, and the known geometry of the data."""

    path: str
    format: str
    manifold: str
    n_samples: int
    ambient_dim: int
    dimension: int
    smoothness: float
    noise_variance: float
    target_name: str | None
    dtype: str
    chunk_rows: int
    n_bytes: int
    seconds: float


def _seed(*entropy) -> int:
    return int(np.random.SeedSequence([int(e) for e in entropy]).generate_state(1, dtype=np.uint64)[0] >> 1)


class _Blocks:
    """Draws blocks of one fixed manifold (see the module docstring)."""

    def __init__(self, manifold, d, ambient_dim, noise, seed, params):
        from . import manifolds

        self.name, self.noise, self.params = manifold, noise, params
        struct = np.random.default_rng(_seed(seed, 1))
        if manifold == "rendered_objects":
            size = int(params.get("size", 32))
            if ambient_dim is not None and ambient_dim != size * size:
                raise ValueError(f"write_synthetic: rendered_objects images of size {size} have D = {size * size}; "
                                 f"got ambient_dim={ambient_dim}. Pass size= (D = size^2) instead.")
            self.D, self.d, self.k, self.n_coords = size * size, d, None, d
            return
        if manifold == "graph_manifold":
            D = check_int(ambient_dim if ambient_dim is not None else 30, "ambient_dim", owner="write_synthetic", low=d)
            m = D - d
            amp, freq = float(params.get("amplitude", 0.3)), float(params.get("frequency", 2.0))
            # the construction of manifolds.graph_manifold: waves, phases and a rotation drawn once
            self.w = struct.standard_normal((m, d)) * 2 * np.pi * freq / math.sqrt(d)
            self.phi = struct.uniform(0, 2 * np.pi, m)
            self.amp = amp
            self.rot = manifolds.random_embedding(D, D, struct)
            self.D, self.d, self.k, self.n_coords = D, d, D, d
            return
        probe = self._native(4, 0, d)
        self.k = probe.points.shape[1]
        self.d = int(probe.dimension)
        self.n_coords = probe.coords.shape[1]
        D = self.k if ambient_dim is None else check_int(ambient_dim, "ambient_dim", owner="write_synthetic", low=self.k)
        self.emb = None if D == self.k else manifolds.random_embedding(self.k, D, struct)
        self.D = D
        self._d_arg = d

    def _native(self, n, seed, d):
        from . import manifolds

        gen = manifolds.GENERATORS[self.name]
        kwargs = dict(self.params)
        if self.name == "sphere":
            kwargs["d"] = d
        return gen(n, seed=seed, **kwargs)

    def draw(self, n, seed):
        """(points (n, D), intrinsic coordinates (n, d)) of one block."""
        from . import manifolds

        rng = np.random.default_rng(seed)
        if self.name == "rendered_objects":
            u = rng.uniform(0, 1, (n, self.d))
            pts = manifolds.render_pebble(u, size=self.D_side).reshape(n, -1)
            coords = u
        elif self.name == "graph_manifold":
            t = rng.uniform(0, 1, (n, self.d))
            native = np.hstack([t, self.amp * np.sin(t @ self.w.T + self.phi)])
            pts, coords = native @ self.rot.T, t
        else:
            s = self._native(n, _seed(seed, 3), self._d_arg)
            pts = s.points if self.emb is None else s.points @ self.emb.T
            coords = s.coords
        if self.noise > 0:
            pts = pts + self.noise * rng.standard_normal(pts.shape)
        return pts, coords

    @property
    def D_side(self):
        return int(round(math.sqrt(self.D)))


def write_synthetic(path, manifold: str = "graph_manifold", n: int = 100_000, *, d: int = 3,
                    ambient_dim: int | None = None, noise: float = 0.0, smoothness: float = 1.0,
                    noise_std: float = 0.1, target: bool = True, chunk_rows: int = 16_384, dtype="float32",
                    seed: int = 0, overwrite: bool = False, **params) -> DiskSample:
    """Write ``n`` rows of a synthetic manifold (and a Hölder target) to ``path``, one block at a time.

    Parameters
    ----------
    path : str or os.PathLike
        Ends in ``.npy``, ``.parquet`` or ``.zarr`` (the format; see the module docstring for the layout).
    manifold : str
        One of :data:`WRITABLE_MANIFOLDS` (the generators of :mod:`manireg.data.manifolds`).
    n : int
        Rows.
    d : int
        Intrinsic dimension where the manifold takes one (sphere, graph_manifold, rendered_objects: 2..4).
    ambient_dim : int, optional
        D: the sample is embedded in R^D by a random isometry (rendered images: D = size^2, give ``size=``).
    noise : float
        Standard deviation of Gaussian noise added to the points in R^D.
    smoothness, noise_std : float
        Hölder order of the target (:func:`manireg.data.targets.holder_target`, lacunary) and label noise.
    target : bool
        Write the target (see the layouts).
    chunk_rows : int
        Rows per block (and per Parquet row group / Zarr chunk). Memory is a few blocks.
    dtype : {"float32", "float64"}
        Stored type of the features.
    seed : int
    overwrite : bool
        Replace an existing file.
    **params
        Extra parameters of the generator (``radius=``, ``size=``, ``amplitude=``, ...).

    Returns
    -------
    DiskSample
    """
    from .targets import holder_target

    owner = "write_synthetic"
    p = os.fspath(path)
    check_choice(manifold, "manifold", owner=owner, choices=WRITABLE_MANIFOLDS)
    n = check_int(n, "n", owner=owner, low=2)
    chunk_rows = check_int(chunk_rows, "chunk_rows", owner=owner, low=1)
    seed = check_int(seed, "seed", owner=owner, low=0)
    noise = check_float(noise, "noise", owner=owner, low=0.0)
    noise_std = check_float(noise_std, "noise_std", owner=owner, low=0.0)
    check_choice(str(np.dtype(dtype)), "dtype", owner=owner, choices=("float32", "float64"))
    ext = os.path.splitext(p.rstrip("/\\"))[1].lower()
    check_choice(ext, "path suffix", owner=owner, choices=(".npy", ".parquet", ".zarr"))
    if os.path.exists(p) and not overwrite:
        raise FileExistsError(f"{owner}: '{p}' exists; pass overwrite=True to replace it.")
    blocks = _Blocks(manifold, d, ambient_dim, noise, seed, params)
    D = blocks.D
    f = holder_target(blocks.n_coords, smoothness, seed=_seed(seed, 4)) if target else None
    dt = np.dtype(dtype)
    t0 = time.perf_counter()
    writer = _open_writer(p, ext, n, D, dt, target, chunk_rows, overwrite)
    try:
        for b, a in enumerate(range(0, n, chunk_rows)):
            m = min(chunk_rows, n - a)
            bseed = _seed(seed, 2, b)
            pts, coords = blocks.draw(m, bseed)
            y = None
            if target:
                y = f(coords)
                if noise_std > 0:
                    y = y + noise_std * np.random.default_rng(_seed(bseed, 5)).standard_normal(m)
            writer.write(a, pts.astype(dt), y)
    finally:
        writer.close()
    size = _disk_size(p)
    return DiskSample(p, ext[1:], manifold, n, D, int(blocks.d), float(smoothness), float(noise_std) ** 2,
                      ({".npy": f"c{D}", ".parquet": "y", ".zarr": "y"}[ext] if target else None), str(dt),
                      chunk_rows, size, time.perf_counter() - t0)


def _disk_size(p):
    if os.path.isfile(p):
        return os.path.getsize(p)
    return sum(os.path.getsize(os.path.join(r, f)) for r, _, fs in os.walk(p) for f in fs)


def _open_writer(p, ext, n, D, dt, target, chunk_rows, overwrite):
    if ext == ".npy":
        return _NpyWriter(p, n, D + int(bool(target)), dt)
    if ext == ".parquet":
        return _ParquetWriter(p, D, dt, target)
    return _ZarrWriter(p, n, D, dt, target, chunk_rows, overwrite)


class _NpyWriter:
    """An NPY header for the final shape, then the blocks' bytes appended in order."""

    def __init__(self, p, n, cols, dt):
        self.fh = open(p, "wb")
        np.lib.format.write_array_header_1_0(self.fh, {"descr": np.lib.format.dtype_to_descr(dt),
                                                       "fortran_order": False, "shape": (n, cols)})
        self.dt = dt

    def write(self, a, pts, y):
        block = pts if y is None else np.hstack([pts, y.astype(self.dt)[:, None]])
        self.fh.write(np.ascontiguousarray(block, dtype=self.dt).tobytes())

    def close(self):
        self.fh.close()


class _ParquetWriter:
    def __init__(self, p, D, dt, target):
        import pyarrow as pa
        import pyarrow.parquet as pq

        t = pa.float32() if dt == np.float32 else pa.float64()
        fields = [pa.field(f"x{j}", t) for j in range(D)] + ([pa.field("y", pa.float64())] if target else [])
        self.schema = pa.schema(fields)
        self.w = pq.ParquetWriter(p, self.schema)

    def write(self, a, pts, y):
        import pyarrow as pa

        cols = [pa.array(pts[:, j]) for j in range(pts.shape[1])] + ([pa.array(y)] if y is not None else [])
        self.w.write_table(pa.Table.from_arrays(cols, schema=self.schema))

    def close(self):
        self.w.close()


class _ZarrWriter:
    def __init__(self, p, n, D, dt, target, chunk_rows, overwrite):
        from .lazy import _zarr

        zarr = _zarr()
        g = zarr.open_group(p, mode="w" if overwrite else "w-")
        self.X = g.create_array("X", shape=(n, D), chunks=(chunk_rows, D), dtype=dt)
        self.y = g.create_array("y", shape=(n,), chunks=(chunk_rows,), dtype="float64") if target else None

    def write(self, a, pts, y):
        self.X[a:a + len(pts)] = pts
        if y is not None:
            self.y[a:a + len(y)] = y

    def close(self):
        pass
