"""Tables that stay on disk: memory-mapped NPY, Parquet read by row groups, and Zarr.

:func:`open_table` is the one loader. It reads the file's header (shape, dtype, column names), never the
whole array, and returns a :class:`LazyTable`:

* ``table.rows(indices)`` reads the given rows (any order, repeats allowed) as float64;
* ``table.chunks()`` yields ``(start, block)`` pairs covering every row once, each block a float64 array of
  at most ``chunk_rows`` rows, so a pass over the file holds one block at a time;
* ``table.target()`` reads the target column (one float per row);
* ``table.scan()`` makes one pass that checks every value (NaN and inf are counted chunk by chunk, and the
  message names the chunk and the row of the first one, as :func:`manireg.data.load_table` does for a table
  in memory) and computes the data fingerprint of :func:`manireg.geometry.neighbors.data_fingerprint`
  without holding the array, so a campaign on the file and one on the same data loaded in memory have
  the same cell keys.

A table pickles as its path and header (a few hundred bytes): a worker that receives one reopens the file
and reads only the rows its task names.

Memory: a pass holds one block (``chunk_rows`` x D x 8 bytes of float64 plus the stored block). NPY rows are
read with plain file reads (one per run of consecutive rows), not through a memory map: a mapped file
counts every page the kernel maps around a touched row in the process's resident memory, up to the whole
file after a scattered read.

Zarr is optional (``pip install 'manireg[scale]'``); without it a ``.zarr`` path raises a message saying
what to install.

References
----------
.. [1] NumPy, "numpy.lib.format": the NPY header and its memory mapping,
   https://numpy.org/doc/stable/reference/generated/numpy.lib.format.html
.. [2] Apache Arrow, "Reading and writing the Apache Parquet format" (row groups),
   https://arrow.apache.org/docs/python/parquet.html
.. [3] Zarr, "Zarr-Python" (chunked, compressed N-dimensional arrays), https://zarr.readthedocs.io
"""

from __future__ import annotations

import hashlib
import os

import numpy as np

from .._validation import DataValidationError, warn

__all__ = ["LazyTable", "open_table", "LAZY_FORMATS", "DEFAULT_CHUNK_BYTES"]

#: File types :func:`open_table` reads without loading.
LAZY_FORMATS = (".npy", ".parquet", ".pq", ".zarr")

#: Size of one float64 block of a pass over the file (chunk rows = this / (8 D)).
DEFAULT_CHUNK_BYTES = 64 * 2**20


def _zarr():
    try:
        import zarr
    except ImportError:  # pragma: no cover - exercised by monkeypatching in the tests
        raise DataValidationError(
            "reading a .zarr store needs the zarr package, which is not installed. Install it with "
            "pip install 'manireg[scale]' (or pip install zarr), or save the table as .npy or .parquet."
        ) from None
    return zarr


def check_data_path(p: str, supported) -> str:
    """The checks every loader shares: the path exists, is a file (or a .zarr folder), has a known suffix
    and is not empty. Returns the lower-case suffix."""
    if not os.path.exists(p):
        raise DataValidationError(f"no such file: '{p}'. Check the path (relative paths start at the current folder).")
    ext = os.path.splitext(p.rstrip("/\\"))[1].lower()
    if os.path.isdir(p) and ext != ".zarr":
        raise DataValidationError(f"'{p}' is a folder, not a data file. Pass a {', '.join(supported)} file (or a .zarr store).")
    if ext not in supported:
        raise DataValidationError(
            f"unknown data format '{ext or '(none)'}' for '{p}'; supported: {', '.join(supported)}. "
            "Save the table in one of those formats."
        )
    if os.path.isfile(p) and os.path.getsize(p) == 0:
        raise DataValidationError(f"'{p}' is empty (0 bytes). Write the data into it first.")
    return ext


class LazyTable:
    """A table on disk, read by rows or by chunks (see the module docstring). Build it with :func:`open_table`.

    Attributes
    ----------
    path : str
    format : {"npy", "parquet", "zarr"}
    shape : (n_samples, n_features) of the features (the target column is not counted)
    dtype : numpy dtype of the stored features
    feature_names : list of str
    target_name : str or None
    chunk_rows : rows per block of :meth:`chunks`
    """

    def __init__(self, path, fmt, n, feature_names, dtype, *, target_name=None, columns=None, target_column=None,
                 chunk_rows=None, row_groups=None, zarr_kind=None):
        self.path = path
        self._zarr_kind = zarr_kind  # zarr: "array" (one 2-D array) or "group" (X and y)
        self.format = fmt
        self.feature_names = list(feature_names)
        self.target_name = target_name
        self.dtype = np.dtype(dtype)
        self.shape = (int(n), len(self.feature_names))
        self._columns = columns  # npy: positions of the feature columns; parquet: their names
        self._target_column = target_column
        self._row_groups = row_groups  # parquet: (start, stop) rows of each row group
        D = max(1, self.shape[1])
        self.chunk_rows = int(chunk_rows) if chunk_rows else max(256, DEFAULT_CHUNK_BYTES // (8 * D))
        self._scan = None

    # ------------------------------------------------------------------ basics
    @property
    def n_samples(self) -> int:
        return self.shape[0]

    @property
    def n_features(self) -> int:
        return self.shape[1]

    def __len__(self) -> int:
        return self.shape[0]

    def __repr__(self) -> str:
        return (f"LazyTable('{self.path}', format={self.format!r}, shape={self.shape}, dtype={self.dtype}, "
                f"target={self.target_name!r})")

    def __getstate__(self):
        state = dict(self.__dict__)
        state["_scan"] = None if self._scan is None else {k: v for k, v in self._scan.items() if k != "constant"}
        return state

    def __getitem__(self, index):
        """``table[rows]`` is ``table.rows(rows)``; a slice reads that range."""
        if isinstance(index, slice):
            return self.rows(np.arange(self.shape[0])[index])
        return self.rows(index)

    # ------------------------------------------------------------------ reading
    def rows(self, indices, dtype=np.float64) -> np.ndarray:
        """The rows ``indices`` (in that order) as a float64 (or ``dtype``) array of shape (len(indices), n_features)."""
        idx = np.asarray(indices)
        if idx.dtype == bool:
            idx = np.flatnonzero(idx)
        idx = idx.astype(np.int64).reshape(-1)
        n = self.shape[0]
        if idx.size and (idx.min() < -n or idx.max() >= n):
            raise IndexError(f"row index out of range for '{self.path}' with {n} rows.")
        idx = np.where(idx < 0, idx + n, idx)
        if idx.size == 0:
            return np.empty((0, self.shape[1]), dtype=dtype)
        order = np.argsort(idx, kind="stable")
        uniq, inv = np.unique(idx[order], return_inverse=True)
        out = np.empty((idx.size, self.shape[1]), dtype=dtype)
        # The sorted distinct rows are read a block at a time (parquet: all at once, by row group) and each block
        # is cast into its places in ``out``: the stored rows plus ``out`` are never held twice over (a
        # 2.5e5 x 256 campaign cell read 1.2 GB of temporaries beside its 0.5 GB of rows before).
        step = len(uniq) if self.format == "parquet" else self.chunk_rows
        for a in range(0, len(uniq), step):
            b = min(a + step, len(uniq))
            block = self._read_sorted(uniq[a:b])
            lo, hi = np.searchsorted(inv, [a, b])  # inv is sorted: the places of uniq[a:b] are contiguous
            out[order[lo:hi]] = block[inv[lo:hi] - a]
        return out

    def chunks(self, chunk_rows: int | None = None, start: int = 0, stop: int | None = None, dtype=np.float64):
        """Yield ``(first_row, block)`` over rows ``start:stop``, blocks of at most ``chunk_rows`` rows.

        ``dtype``: the type of the blocks (float64 by default; ``np.float32`` of a float32 file skips a copy
        that is twice the stored block)."""
        step = int(chunk_rows or self.chunk_rows)
        stop = self.shape[0] if stop is None else min(int(stop), self.shape[0])
        if self.format == "parquet" and chunk_rows is None:
            for a, b in self._row_groups:
                if b <= start or a >= stop:
                    continue
                lo, hi = max(a, start), min(b, stop)
                yield lo, self._read_range(lo, hi, dtype)
            return
        for a in range(start, stop, step):
            yield a, self._read_range(a, min(a + step, stop), dtype)

    def target(self) -> np.ndarray | None:
        """The target column as float64 (n,), or None when the table has no target."""
        if self.target_name is None:
            return None
        if self.format == "npy":
            # block by block: a strided read of one column would touch every page of the file at once
            out = np.empty(self.shape[0])
            for a in range(0, self.shape[0], self.chunk_rows):
                b = min(a + self.chunk_rows, self.shape[0])
                out[a:b] = self._npy_rows(a, b)[:, self._target_column]
            return out
        if self.format == "parquet":
            import pyarrow.parquet as pq

            col = pq.read_table(self.path, columns=[self.target_name]).column(0)
            return _numeric_column(col.to_numpy(zero_copy_only=False), self.path, self.target_name)
        return np.asarray(self._zarr_group()[self.target_name][:], dtype=np.float64)

    def to_array(self) -> np.ndarray:
        """Every row in memory (float64). Only for tables that fit; the point of this class is not to."""
        return self._read_range(0, self.shape[0])

    # ------------------------------------------------------------------ checks and fingerprint
    def scan(self) -> dict:
        """One pass over the file: NaN/inf check (raises with counts and the chunk and row of the first),
        constant columns (a warning), and the fingerprint. Cached; returns ``{"fingerprint", "n_chunks"}``."""
        if self._scan is not None:
            return self._scan
        p = self.path
        n, D = self.shape
        if n < 2:
            raise DataValidationError(f"'{p}' has {n} data row(s); at least 2 are needed.")
        h = hashlib.blake2b(digest_size=16)
        h.update(str((n, D)).encode())
        h.update(str(np.dtype(np.float64)).encode())
        bad_total, per_col, first = 0, {}, None
        lo = np.full(D, np.inf)
        hi = np.full(D, -np.inf)
        n_chunks = 0
        # blocks in the stored precision (float32 stays float32: half the memory); the fingerprint hashes
        # float64 bytes, converted a slice at a time
        read_as = np.float32 if self.dtype == np.float32 else np.float64
        piece = max(1, (8 * 2**20) // (8 * max(D, 1)))
        for c, (a, block) in enumerate(self.chunks(dtype=read_as)):
            n_chunks += 1
            bad = ~np.isfinite(block)
            if bad.any():
                r, cols = np.nonzero(bad)
                bad_total += int(bad.sum())
                for j, cnt in zip(*np.unique(cols, return_counts=True)):
                    name = self.feature_names[j]
                    per_col[name] = per_col.get(name, 0) + int(cnt)
                if first is None:
                    first = (c, a, a + len(block) - 1, a + int(r[0]), self.feature_names[int(cols[0])])
                continue
            if bad_total:
                continue
            for i in range(0, len(block), piece):
                h.update(np.ascontiguousarray(block[i:i + piece], dtype=np.float64).data.cast("B"))
            np.minimum(lo, block.min(axis=0), out=lo)
            np.maximum(hi, block.max(axis=0), out=hi)
        if bad_total:
            c, a, b, row, col = first
            where = ", ".join(f"'{k}': {v}" for k, v in list(per_col.items())[:5])
            raise DataValidationError(
                f"'{p}' has {bad_total} missing or infinite value(s) (NaN/inf) in features ({where}); first at row "
                f"{row} (chunk {c} of {n_chunks}, rows {a}-{b}, column '{col}'). Drop or impute those rows first."
            )
        y = self.target()
        if y is not None:
            bady = np.flatnonzero(~np.isfinite(y))
            if bady.size:
                raise DataValidationError(
                    f"'{p}': target '{self.target_name}' has {bady.size} missing or infinite value(s) (NaN/inf); "
                    f"first at row {int(bady[0])} (chunk {int(bady[0]) // self.chunk_rows}). Drop those rows first."
                )
        const = [self.feature_names[j] for j in np.flatnonzero(hi - lo == 0)]
        if const:
            from .io import _preview

            warn(f"'{p}': constant column(s) {_preview(const)} carry no information; consider dropping them.", stacklevel=3)
        self._scan = {"fingerprint": h.hexdigest(), "n_chunks": n_chunks, "constant": const}
        return self._scan

    def fingerprint(self) -> str:
        """Content hash of the features as float64, equal to ``data_fingerprint(load_table(path).X)``."""
        return self.scan()["fingerprint"]

    # ------------------------------------------------------------------ per format
    def _memmap(self):
        return np.load(self.path, mmap_mode="r", allow_pickle=False)

    def _npy_layout(self):
        """(offset of the data, stored dtype, stored columns, C order) from the NPY header, read once."""
        lay = self.__dict__.get("_layout")
        if lay is None:
            with open(self.path, "rb") as f:
                version = np.lib.format.read_magic(f)
                read_header = (np.lib.format.read_array_header_1_0 if version == (1, 0)
                               else np.lib.format.read_array_header_2_0)
                shape, fortran, dtype = read_header(f)
                lay = (f.tell(), np.dtype(dtype), int(shape[1]), not fortran and np.dtype(dtype).isnative)
            self.__dict__["_layout"] = lay
        return lay

    def _npy_rows(self, a: int, b: int, rows=None) -> np.ndarray:
        """Stored rows ``a:b`` (or the sorted distinct ``rows``) of an NPY file, all columns, in its dtype.

        Read with plain file reads into this process's memory. A memory map would count every page the
        kernel maps around each touched row (it maps neighbouring cached pages too) in the resident memory,
        up to the whole file after a scattered read of candidate rows; a read holds only the bytes asked for.
        """
        offset, dt, ncol, c_order = self._npy_layout()
        if not c_order:  # Fortran order or foreign byte order: through the memory map
            mm = self._memmap()
            try:
                return np.array(mm[a:b] if rows is None else mm[rows])
            finally:
                del mm
        row_bytes = dt.itemsize * ncol
        if rows is None:
            out = np.empty((b - a, ncol), dtype=dt)
            with open(self.path, "rb", buffering=0) as f:
                f.seek(offset + a * row_bytes)
                _read_into(f, out)
            return out
        out = np.empty((rows.size, ncol), dtype=dt)
        if rows.size == 0:
            return out
        breaks = np.flatnonzero(np.diff(rows) != 1) + 1
        starts = np.concatenate([[0], breaks])
        stops = np.concatenate([breaks, [rows.size]])
        with open(self.path, "rb", buffering=0) as f:
            for s0, s1 in zip(starts.tolist(), stops.tolist()):  # one read per run of consecutive rows
                f.seek(offset + int(rows[s0]) * row_bytes)
                _read_into(f, out[s0:s1])
        return out

    def _zarr_group(self):
        zarr = _zarr()
        return zarr.open(self.path, mode="r")

    def _zarr_X(self):
        node = self._zarr_group()
        return node if self._zarr_kind == "array" else node["X"]

    def _read_range(self, a: int, b: int, dtype=np.float64) -> np.ndarray:
        if self.format == "npy":
            block = self._npy_rows(a, b)
            block = block[:, self._columns] if self._columns is not None else block
            return block.astype(dtype, copy=False)
        if self.format == "parquet":
            parts = []
            for g, (ga, gb) in enumerate(self._row_groups):
                if gb <= a or ga >= b:
                    continue
                t = self._read_group(g)
                parts.append(t[max(a, ga) - ga:min(b, gb) - ga])
            return (np.vstack(parts) if parts else np.empty((0, self.shape[1]))).astype(dtype, copy=False)
        z = self._zarr_X()
        block = np.asarray(z[a:b], dtype=dtype)
        return block[:, self._columns] if self._columns is not None else block

    def _read_group(self, g: int) -> np.ndarray:
        import pyarrow.parquet as pq

        pf = pq.ParquetFile(self.path)
        t = pf.read_row_group(g, columns=list(self._columns))
        return np.column_stack([np.asarray(t.column(i).to_numpy(zero_copy_only=False), dtype=np.float64)
                                for i in range(t.num_columns)])

    def _read_sorted(self, uniq: np.ndarray) -> np.ndarray:
        """Rows ``uniq`` (sorted, distinct) in that order (NPY: in the stored dtype; the caller casts)."""
        if self.format == "npy":
            block = self._npy_rows(0, 0, rows=uniq)
            return block[:, self._columns] if self._columns is not None else block  # cast where it is placed
        if self.format == "parquet":
            out = np.empty((uniq.size, self.shape[1]))
            starts = np.array([a for a, _ in self._row_groups])
            group = np.searchsorted(starts, uniq, side="right") - 1
            for g in np.unique(group):
                sel = group == g
                out[sel] = self._read_group(int(g))[uniq[sel] - starts[g]]
            return out
        z = self._zarr_X()
        block = np.asarray(z.get_orthogonal_selection((uniq, slice(None))), dtype=np.float64)
        return block[:, self._columns] if self._columns is not None else block


def _read_into(f, out: np.ndarray) -> None:
    """Fill the C-contiguous array ``out`` from the file's current position (raises on a short file)."""
    view = memoryview(out.reshape(-1).view(np.uint8))
    got = 0
    while got < len(view):
        r = f.readinto(view[got:])
        if not r:
            raise DataValidationError(f"'{f.name}' ends before the rows its header promises; the file is truncated. "
                                      "Write it again.")
        got += r


def _numeric_column(values, p, name):
    a = np.asarray(values)
    if not np.issubdtype(a.dtype, np.number) or np.issubdtype(a.dtype, np.complexfloating) or a.dtype == bool:
        raise DataValidationError(f"column '{name}' in '{p}' is not numeric (dtype {a.dtype}). Save numbers only.")
    return a.astype(np.float64)


def open_table(path, target=None, *, features=None, drop=None, chunk_rows: int | None = None,
               validate: bool = False) -> LazyTable:
    """Open a table on disk without loading it (see the module docstring).

    Parameters
    ----------
    path : str or os.PathLike
        ``.npy`` (a 2-D array; columns ``c0, c1, ...``), ``.parquet``/``.pq`` (numeric columns) or ``.zarr``
        (a group with a 2-D array ``X`` and optionally a 1-D array ``y``, or a single 2-D array).
    target : column name (or integer position for ``.npy``), optional
        As in :func:`manireg.data.load_table`. For a Zarr group, the name of a 1-D array (``"y"``).
    features, drop : lists of column names, optional
        As in :func:`manireg.data.load_table` (Parquet and NPY columns).
    chunk_rows : int, optional
        Rows per block of a pass (default: 64 MiB of float64; Parquet passes follow its row groups).
    validate : bool, default=False
        Run :meth:`LazyTable.scan` now (one pass over the file) instead of on first use.

    Raises
    ------
    ValueError (DataValidationError)
        Missing file, unknown format, a file that is not the format its name says, empty file, missing
        target, non-numeric columns, fewer than 2 rows; with ``validate=True`` also NaN/inf (count, chunk,
        row) and a target of the wrong length.
    """
    from .io import _preview, _suggest

    p = os.fspath(path)
    ext = check_data_path(p, LAZY_FORMATS)
    if chunk_rows is not None and (isinstance(chunk_rows, bool) or int(chunk_rows) < 1):
        raise ValueError(f"the 'chunk_rows' parameter of open_table must be an int >= 1; got {chunk_rows!r}.")
    if ext == ".npy":
        table = _open_npy(p, target, features, drop, chunk_rows)
    elif ext in (".parquet", ".pq"):
        table = _open_parquet(p, target, features, drop, chunk_rows, _preview, _suggest)
    else:
        table = _open_zarr(p, target, features, drop, chunk_rows)
    if table.shape[0] < 2:
        raise DataValidationError(f"'{p}' has {table.shape[0]} data row(s); at least 2 are needed.")
    if table.shape[1] == 0:
        raise DataValidationError(f"'{p}' has no feature columns besides the target '{table.target_name}'. Add features.")
    if features is None:
        _refuse_id_columns(table, p)
    if validate:
        table.scan()
    return table


def _refuse_id_columns(table, p):
    """The check of load_table, on the first block of rows: a feature named like an ID whose values there are
    distinct integers is refused with the --drop fix (only columns with such a name are read)."""
    from .io import _id_columns_error, _looks_like_id, _named_like_id

    named = [j for j, c in enumerate(table.feature_names) if _named_like_id(c)]
    if not named:
        return
    _, first = next(table.chunks(chunk_rows=min(table.shape[0], 4096)))
    ids = [table.feature_names[j] for j in named if _looks_like_id(table.feature_names[j], first[:, j])]
    if ids:
        raise _id_columns_error(ids, p, seen=f" in the first {len(first):,} rows")


def _columns_from(names, target_idx, features, drop, p):
    from .io import _preview, _suggest

    keep = [j for j in range(len(names)) if j != target_idx]
    if features is not None:
        missing = [c for c in features if str(c) not in names]
        if missing:
            raise DataValidationError(f"feature column(s) {missing} are not in '{p}'.{_suggest(missing[0], names)} "
                                      f"Columns are: {_preview(names)}.")
        keep = [names.index(str(c)) for c in features]
    elif drop:
        missing = [c for c in drop if str(c) not in names]
        if missing:
            raise DataValidationError(f"column(s) {missing} to drop are not in '{p}'.{_suggest(missing[0], names)} "
                                      f"Columns are: {_preview(names)}.")
        keep = [j for j in keep if names[j] not in {str(c) for c in drop}]
    return keep


def _open_npy(p, target, features, drop, chunk_rows):
    try:
        mm = np.load(p, mmap_mode="r", allow_pickle=False)
    except Exception as exc:
        raise DataValidationError(f"could not read '{p}' as .npy: {exc}") from None
    shape, dtype = mm.shape, mm.dtype
    del mm
    if not np.issubdtype(dtype, np.number) or np.issubdtype(dtype, np.complexfloating):
        raise DataValidationError(f"array 'array' in '{p}' is not numeric (dtype {dtype}). Save numbers only.")
    if len(shape) != 2:
        raise DataValidationError(f"the array in '{p}' must be 2-D (n_samples, n_columns); got shape {shape}.")
    names = [f"c{j}" for j in range(shape[1])]
    tidx, tname = None, None
    if target is not None:
        idx = target
        if isinstance(target, str):
            if target.lstrip("-").isdigit():
                idx = int(target)
            elif target not in names:
                raise DataValidationError(f"target '{target}' is not a column of '{p}'; .npy columns are c0..c{shape[1] - 1} or an integer position.")
            else:
                idx = names.index(target)
        if not (isinstance(idx, (int, np.integer)) and -shape[1] <= idx < shape[1]):
            raise DataValidationError(f"target position {target!r} is outside the {shape[1]} columns of '{p}'.")
        tidx = int(idx) % shape[1]
        tname = names[tidx]
    keep = _columns_from(names, tidx, features, drop, p)
    cols = None if len(keep) == shape[1] else np.asarray(keep)
    return LazyTable(p, "npy", shape[0], [names[j] for j in keep], dtype, target_name=tname, columns=cols,
                     target_column=tidx, chunk_rows=chunk_rows)


def _open_parquet(p, target, features, drop, chunk_rows, _preview, _suggest):
    import pyarrow as pa
    import pyarrow.parquet as pq

    try:
        pf = pq.ParquetFile(p)
    except Exception as exc:
        raise DataValidationError(f"could not read '{p}' as parquet: {exc}") from None
    schema = pf.schema_arrow
    names = [str(n) for n in schema.names]
    tname = None
    tidx = None
    if target is not None:
        tname = str(target)
        if tname not in names:
            raise DataValidationError(
                f"target column '{tname}' is not in '{p}'.{_suggest(tname, names)} Columns are: {_preview(names)}. "
                "Pass one of them with --target COL (target=... in Python)."
            )
        tidx = names.index(tname)
    keep = _columns_from(names, tidx, features, drop, p)
    numeric = lambda t: pa.types.is_integer(t) or pa.types.is_floating(t)  # noqa: E731
    nonnum = [names[j] for j in keep if not numeric(schema.field(j).type)]
    if nonnum:
        raise DataValidationError(
            f"non-numeric feature column(s) in '{p}': {_preview(nonnum)}. Leave them out with --drop "
            f"{' '.join(nonnum[:3])} (drop=[...] in Python), choose the features with --features COL ... "
            "(features=[...]), or encode them as numbers."
        )
    if tidx is not None and not numeric(schema.field(tidx).type):
        raise DataValidationError(f"target column '{tname}' in '{p}' is not numeric. A regression target must be numbers.")
    md = pf.metadata
    bounds, a = [], 0
    for g in range(md.num_row_groups):
        b = a + md.row_group(g).num_rows
        bounds.append((a, b))
        a = b
    dtypes = {schema.field(j).type for j in keep}
    dtype = np.float32 if dtypes == {pa.float32()} else np.float64
    return LazyTable(p, "parquet", md.num_rows, [names[j] for j in keep], dtype, target_name=tname,
                     columns=[names[j] for j in keep], chunk_rows=chunk_rows, row_groups=bounds)


def _open_zarr(p, target, features, drop, chunk_rows):
    zarr = _zarr()
    try:
        node = zarr.open(p, mode="r")
    except Exception as exc:
        raise DataValidationError(f"could not read '{p}' as a zarr store: {exc}") from None
    if hasattr(node, "shape"):  # a single array, columns c0..
        arr, kind = node, "array"
    else:
        keys = sorted(node.array_keys())
        if "X" not in keys:
            raise DataValidationError(f"the zarr group '{p}' has no array 'X'; arrays are: {keys}. Store the features as X.")
        arr, kind = node["X"], "group"
    if len(arr.shape) != 2:
        raise DataValidationError(f"array 'X' in '{p}' must be 2-D (n_samples, n_features); got shape {tuple(arr.shape)}.")
    dtype = np.dtype(arr.dtype)
    if not np.issubdtype(dtype, np.number) or np.issubdtype(dtype, np.complexfloating):
        raise DataValidationError(f"array 'X' in '{p}' is not numeric (dtype {dtype}). Save numbers only.")
    n, D = (int(v) for v in arr.shape)
    prefix = "c" if kind == "array" else "x"
    names = [f"{prefix}{j}" for j in range(D)]
    tname = None
    if target is not None:
        if kind == "array":
            raise DataValidationError(f"'{p}' holds one 2-D array; put the target beside it as a 1-D array in a group "
                                      "(X and y) to pass target=.")
        keys = sorted(node.array_keys())
        if str(target) not in keys:
            raise DataValidationError(f"target array '{target}' is not in '{p}'; arrays are: {keys}.")
        tname = str(target)
        if int(node[tname].shape[0]) != n:
            raise DataValidationError(f"'{p}': the target has {node[tname].shape[0]} values but there are {n} feature rows; they must match.")
    keep = _columns_from(names, None, features, drop, p)
    cols = None if len(keep) == D else np.asarray(keep)
    if chunk_rows is None:
        chunk_rows = max(int(arr.chunks[0]), DEFAULT_CHUNK_BYTES // (8 * D) // int(arr.chunks[0]) * int(arr.chunks[0]))
    table = LazyTable(p, "zarr", n, [names[j] for j in keep], dtype, target_name=tname, columns=cols, chunk_rows=chunk_rows,
                      zarr_kind=kind)
    return table
