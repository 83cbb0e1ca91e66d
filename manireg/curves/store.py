"""SQLite result store of a campaign: one row per cell, keyed by the cell's content hash.

Properties the execution layer relies on:

* **WAL mode** (write-ahead log) [1]_: readers never block the writer and a killed process leaves the
  database consistent; the cells in flight are lost, the committed ones are not.
* **One transaction per finished cell**: :meth:`ResultStore.put` commits each row on its own.
* **No duplicates**: the cell key is the PRIMARY KEY; an ``ok`` row is never overwritten, a ``failed`` row
  is only replaced by a later ``ok`` row of the same key (a retry).
* **Several writers**: every connection sets ``busy_timeout`` so concurrent writers wait for the lock
  instead of failing [2]_.
* **Nothing is deleted**: the store has no delete operation.
* **Self-describing**: a ``campaigns`` table keeps each campaign's spec, data fingerprint, dimension,
  smoothness, ambient dimension and package versions, so a report can be rebuilt from the file alone.
* **Versioned**: ``PRAGMA user_version`` holds the schema version. A store written before campaigns had
  their name is migrated in place when opened (a copy of the file is kept beside it first, and every row is
  kept, its key recomputed under the new field names so a resumed campaign finds it); a store of schema 1
  gains the geometry table; a store from a newer manireg is refused.
* **Geometry read-outs cached**: the ``geometry`` table keeps the geometry read-out of the campaign's data
  keyed by the data's fingerprint, the read-out's settings and the manireg version
  (:func:`geometry_key`, :meth:`ResultStore.geometry`), so a second run of the same command does not compute
  it again. The read-out is stored as tagged JSON (dataclasses of manireg, arrays with dtype and shape) and
  read back into the same objects; nothing is unpickled.

References
----------
.. [1] SQLite, "Write-Ahead Logging", https://www.sqlite.org/wal.html
.. [2] SQLite, "PRAGMA busy_timeout", https://www.sqlite.org/pragma.html#pragma_busy_timeout
"""

from __future__ import annotations

import datetime
import json
import math
import os
import pathlib
import sqlite3

from manireg.curves.sweep import ROW_COLUMNS

__all__ = ["ResultStore", "StoreError", "SCHEMA_VERSION", "geometry_key", "encode_result", "decode_result"]

_TYPES = {
    "key": "TEXT PRIMARY KEY", "campaign": "TEXT NOT NULL", "learner": "TEXT NOT NULL", "n": "INTEGER NOT NULL",
    "repeat": "INTEGER NOT NULL", "seed": "INTEGER", "train_mse": "REAL", "val_mse": "REAL", "test_mse": "REAL",
    "test_mse_clean": "REAL", "steps": "INTEGER", "best_step": "INTEGER", "stop_reason": "TEXT",
    "late_best": "INTEGER", "seconds": "REAL", "n_parameters": "INTEGER", "width": "INTEGER", "depth": "INTEGER",
    "width_multiplier": "REAL", "precision": "TEXT", "status": "TEXT NOT NULL", "error": "TEXT", "created_at": "TEXT",
    "config_json": "TEXT", "regret": "REAL", "policy_value": "REAL", "value_estimate": "REAL", "value_se": "REAL",
    "ess": "REAL", "clipped_share": "REAL", "overlap_json": "TEXT",
    "config_json": "TEXT", "test_cross_entropy": "REAL", "excess_logistic_risk": "REAL", "test_error_rate": "REAL",
    "excess_error_rate": "REAL", "calibration_error": "REAL",
}
#: Schema version written to ``PRAGMA user_version``; 0 is a store from before the campaign vocabulary,
#: 1 one without the geometry table.
SCHEMA_VERSION = 2


class StoreError(ValueError):
    """The store cannot be opened or written (a ``ValueError`` subclass)."""


def _schema_version(path) -> int:
    """``PRAGMA user_version`` of an existing SQLite file, read without writing (0 for a new or foreign file)."""
    if not os.path.isfile(path) or os.path.getsize(path) == 0:
        return 0
    try:
        con = sqlite3.connect(pathlib.Path(os.path.abspath(path)).as_uri() + "?mode=ro", uri=True)
        try:
            return int(con.execute("PRAGMA user_version").fetchone()[0])
        finally:
            con.close()
    except sqlite3.DatabaseError:
        return 0  # not a database: _check_writable says so


def _has_table(path, name) -> bool:
    con = sqlite3.connect(path)
    try:
        return con.execute("SELECT 1 FROM sqlite_master WHERE type = 'table' AND name = ?", (name,)).fetchone() is not None
    finally:
        con.close()


def _now():
    return datetime.datetime.now(datetime.timezone.utc).isoformat(timespec="seconds")


def _clean(v):
    if isinstance(v, float) and not math.isfinite(v):
        return None
    if hasattr(v, "item") and not isinstance(v, (str, bytes)):
        v = v.item()
        if isinstance(v, float) and not math.isfinite(v):
            return None
    if isinstance(v, bool):
        return int(v)
    return v


class ResultStore:
    """Rows of finished cells in an SQLite file (WAL mode), safe for several processes at once.

    Parameters
    ----------
    path : str or os.PathLike
        Database file; created (with missing parent folders) when absent.
    timeout : float, default=60.0
        Seconds a writer waits for the lock held by another process (``busy_timeout``).

    Raises
    ------
    StoreError
        When the file or its folder cannot be created or written; raised at construction, before any
        work, naming the path and the fix.

    References
    ----------
    .. [1] SQLite, "Write-Ahead Logging", https://www.sqlite.org/wal.html

    Examples
    --------
    >>> import tempfile, os
    >>> store = ResultStore(os.path.join(tempfile.mkdtemp(), "s.sqlite"))
    >>> store.finished_keys()
    set()
    """

    def __init__(self, path, *, timeout: float = 60.0):
        self.path = os.fspath(path)
        self.timeout = float(timeout)
        version = _schema_version(self.path)
        if version > SCHEMA_VERSION:
            raise StoreError(
                f"the result store at {self.path!r} was written by a newer manireg (schema {version}; this one "
                f"reads up to {SCHEMA_VERSION}). Upgrade manireg to read it; the file was not changed."
            )
        self._check_writable()
        from manireg.curves.migrate import GEOMETRY_TABLE_SQL, LEGACY_TABLE, migrate_store

        if version < SCHEMA_VERSION and (version >= 1 or _has_table(self.path, LEGACY_TABLE)):
            migrate_store(self.path)
        with self._connect() as con:
            cols = ", ".join(f'"{c}" {_TYPES[c]}' for c in ROW_COLUMNS)
            con.execute(f"CREATE TABLE IF NOT EXISTS cells ({cols})")
            # A store written by an older version lacks the newer columns: add them (empty for old rows)
            # instead of failing, so nothing stored is lost.
            have = {r[1] for r in con.execute("PRAGMA table_info(cells)")}
            for c in ROW_COLUMNS:
                if c not in have:
                    con.execute(f'ALTER TABLE cells ADD COLUMN "{c}" {_TYPES[c].replace(" NOT NULL", "")}')
            con.execute("CREATE INDEX IF NOT EXISTS cells_campaign ON cells(campaign)")
            con.execute(
                "CREATE TABLE IF NOT EXISTS campaigns (campaign TEXT PRIMARY KEY, spec_json TEXT, fingerprint TEXT, "
                "dimension REAL, smoothness REAL, ambient_dim INTEGER, meta_json TEXT, created_at TEXT, updated_at TEXT)"
            )
            con.execute(GEOMETRY_TABLE_SQL)
            con.execute(f"PRAGMA user_version = {SCHEMA_VERSION}")

    def __repr__(self):
        return f"ResultStore({self.path!r})"

    # ------------------------------------------------------------------ connection
    def _fail(self, why):
        raise StoreError(
            f"cannot write the result store at {self.path!r}: {why}. Pass a path in a folder you can write "
            "to (e.g. store='results/campaign.sqlite' under your home or project folder), or fix the permissions."
        ) from None

    def _check_writable(self):
        folder = os.path.dirname(os.path.abspath(self.path))
        if os.path.isdir(self.path):
            self._fail("it is a folder, not a file")
        try:
            os.makedirs(folder, exist_ok=True)
        except OSError as exc:
            self._fail(f"its folder cannot be created ({exc.strerror or exc})")
        if os.path.exists(self.path):
            if not os.access(self.path, os.W_OK):
                self._fail("the file is not writable")
        elif not os.access(folder, os.W_OK | os.X_OK):
            self._fail(f"the folder {folder!r} is not writable")
        try:
            con = self._connect()
            con.execute("CREATE TABLE IF NOT EXISTS _probe (x INTEGER)")
            con.commit()
            con.close()
        except sqlite3.DatabaseError as exc:
            self._fail(f"SQLite could not open it ({exc})")

    def _connect(self) -> sqlite3.Connection:
        con = sqlite3.connect(self.path, timeout=self.timeout, isolation_level=None)
        con.execute(f"PRAGMA busy_timeout = {int(self.timeout * 1000)}")
        mode = con.execute("PRAGMA journal_mode = WAL").fetchone()[0]
        if str(mode).lower() != "wal":  # pragma: no cover - e.g. a network file system without shared memory
            con.execute("PRAGMA journal_mode = DELETE")
        con.execute("PRAGMA synchronous = NORMAL")
        return _Conn(con)

    # ------------------------------------------------------------------ cells
    def has(self, key: str) -> bool:
        """Whether a row (ok or failed) with this key is stored."""
        with self._connect() as con:
            return con.execute("SELECT 1 FROM cells WHERE key = ?", (key,)).fetchone() is not None

    def finished_keys(self, *, include_failed: bool = True, campaign: str | None = None) -> set:
        """Keys of stored rows: every row, or only ``status='ok'`` rows with ``include_failed=False``
        (what a run with ``retry_failed=True`` skips)."""
        sql = "SELECT key FROM cells WHERE 1=1"
        args = []
        if not include_failed:
            sql += " AND status = 'ok'"
        if campaign is not None:
            sql += " AND campaign = ?"
            args.append(campaign)
        with self._connect() as con:
            return {r[0] for r in con.execute(sql, args)}

    def put(self, row: dict) -> bool:
        """Store one finished cell in its own transaction; returns True when the row was written.

        An ``ok`` row is inserted unless its key is already stored as ``ok``; it replaces a ``failed`` row
        of the same key (a retry). A ``failed`` row is inserted only when the key is absent.
        """
        missing = [c for c in ("key", "campaign", "learner", "n", "repeat", "status") if row.get(c) is None]
        if missing:
            raise ValueError(f"ResultStore.put: the row lacks {missing}; rows come from manireg.curves.execution.")
        if row["status"] not in ("ok", "failed"):
            raise ValueError(f"ResultStore.put: status must be 'ok' or 'failed'; got {row['status']!r}.")
        values = {c: _clean(row.get(c)) for c in ROW_COLUMNS}
        if values["created_at"] is None:
            values["created_at"] = _now()
        cols = ", ".join(f'"{c}"' for c in ROW_COLUMNS)
        marks = ", ".join("?" for _ in ROW_COLUMNS)
        if values["status"] == "ok":
            updates = ", ".join(f'"{c}" = excluded."{c}"' for c in ROW_COLUMNS if c != "key")
            sql = (f"INSERT INTO cells ({cols}) VALUES ({marks}) ON CONFLICT(key) DO UPDATE SET {updates} "
                   "WHERE cells.status != 'ok'")
        else:
            sql = f"INSERT OR IGNORE INTO cells ({cols}) VALUES ({marks})"
        with self._connect() as con:
            con.execute("BEGIN IMMEDIATE")
            try:
                cur = con.execute(sql, [values[c] for c in ROW_COLUMNS])
                con.execute("COMMIT")
            except BaseException:
                con.execute("ROLLBACK")
                raise
            return cur.rowcount > 0

    def rows(self, campaign: str | None = None, *, keys=None):
        """Stored rows as a DataFrame with the columns of :data:`manireg.curves.sweep.ROW_COLUMNS`.

        Parameters
        ----------
        campaign : str, optional
            Only this campaign's rows.
        keys : iterable of str, optional
            Only these cell keys.
        """
        import pandas as pd

        sql = "SELECT * FROM cells"
        args = []
        if campaign is not None:
            sql += " WHERE campaign = ?"
            args.append(campaign)
        sql += " ORDER BY campaign, learner, n, repeat"
        with self._connect() as con:
            df = pd.read_sql_query(sql, con.raw, params=args)
        if keys is not None:
            keys = set(keys)
            df = df[df["key"].isin(keys)].reset_index(drop=True)
        df["late_best"] = df["late_best"].map(lambda v: None if v is None or v != v else bool(v)).astype(object)
        for c in ("train_mse", "val_mse", "test_mse", "test_mse_clean", "seconds", "width_multiplier"):
            df[c] = pd.to_numeric(df[c], errors="coerce").astype(float)
        return df

    def __len__(self) -> int:
        with self._connect() as con:
            return int(con.execute("SELECT COUNT(*) FROM cells").fetchone()[0])

    # ------------------------------------------------------------------ campaigns
    def put_campaign(self, meta: dict) -> None:
        """Record (or refresh) a campaign's metadata: spec, fingerprint, dimension, smoothness, versions, ..."""
        from manireg._results import to_jsonable

        now = _now()
        vals = (meta["campaign"], json.dumps(to_jsonable(meta.get("spec")), sort_keys=True), meta.get("fingerprint"),
                _clean(meta.get("dimension")), _clean(meta.get("smoothness")), _clean(meta.get("ambient_dim")),
                json.dumps(to_jsonable(meta), sort_keys=True), now, now)
        with self._connect() as con:
            con.execute("BEGIN IMMEDIATE")
            try:
                con.execute(
                    "INSERT INTO campaigns VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?) ON CONFLICT(campaign) DO UPDATE SET "
                    "spec_json = excluded.spec_json, fingerprint = excluded.fingerprint, dimension = excluded.dimension, "
                    "smoothness = excluded.smoothness, ambient_dim = excluded.ambient_dim, meta_json = excluded.meta_json, "
                    "updated_at = excluded.updated_at", vals)
                con.execute("COMMIT")
            except BaseException:
                con.execute("ROLLBACK")
                raise

    def campaigns(self) -> list:
        """Names of the campaigns recorded in this store."""
        with self._connect() as con:
            return [r[0] for r in con.execute("SELECT campaign FROM campaigns ORDER BY campaign")]

    def campaign_meta(self, campaign: str) -> dict:
        """Metadata of one campaign (as given to :meth:`put_campaign`)."""
        with self._connect() as con:
            r = con.execute("SELECT meta_json FROM campaigns WHERE campaign = ?", (campaign,)).fetchone()
        if r is None:
            raise KeyError(f"the store {self.path!r} holds no campaign {campaign!r}; it holds {self.campaigns()}.")
        return json.loads(r[0])

    # ------------------------------------------------------------------ geometry read-outs
    def put_geometry(self, key: str, result, *, fingerprint: str, settings: dict, notes=()) -> bool:
        """Keep a geometry read-out under ``key`` (from :func:`geometry_key`); ``notes`` are the warning lines
        shown when it was computed (shown again when it is read back). Returns False, storing nothing, when
        the result holds a value the tagged JSON cannot carry (see :func:`encode_result`)."""
        import zlib

        try:
            blob = zlib.compress(json.dumps(encode_result(result), allow_nan=True).encode(), 6)
        except TypeError:
            return False
        from manireg import __version__

        with self._connect() as con:
            con.execute("BEGIN IMMEDIATE")
            try:
                con.execute("INSERT OR REPLACE INTO geometry VALUES (?, ?, ?, ?, ?, ?, ?)",
                            (key, fingerprint, json.dumps(settings, sort_keys=True), __version__, blob,
                             json.dumps([str(n) for n in notes]), _now()))
                con.execute("COMMIT")
            except BaseException:
                con.execute("ROLLBACK")
                raise
        return True

    def geometry(self, key: str):
        """``(result, notes, created_at)`` of a stored geometry read-out, or None when none is stored under
        ``key`` or the stored one no longer matches this version's result classes (then it is computed again
        and replaced)."""
        import zlib

        with self._connect() as con:
            r = con.execute("SELECT summary, notes_json, created_at FROM geometry WHERE key = ?", (key,)).fetchone()
        if r is None:
            return None
        try:
            result = decode_result(json.loads(zlib.decompress(r[0]).decode()))
        except (ValueError, TypeError, KeyError, AttributeError, ImportError, zlib.error):
            return None
        return result, json.loads(r[1] or "[]"), r[2]


def geometry_key(fingerprint: str, settings: dict) -> str:
    """The key of a geometry read-out: SHA-256 of the data's fingerprint, the read-out's settings (seed, view,
    resamples, given dimension or radius, ...) and the manireg version, in canonical JSON."""
    import hashlib

    from manireg import __version__

    text = json.dumps({"fingerprint": str(fingerprint), "settings": settings, "manireg": __version__},
                      sort_keys=True, default=str)
    return hashlib.sha256(text.encode()).hexdigest()


# ---------------------------------------------------------------------- tagged JSON of result objects
def encode_result(value):
    """A JSON-ready form of a result object that :func:`decode_result` turns back into an equal object.

    Dataclasses of manireg (every field, including those ``to_dict`` leaves out, and attributes set after
    construction), numpy arrays and scalars (dtype and shape kept), tuples, lists, dicts and plain values.

    Raises
    ------
    TypeError
        For any other object (nothing is pickled).
    """
    import base64
    import dataclasses

    import numpy as np

    if value is None or isinstance(value, (bool, str)):
        return value
    if isinstance(value, (int, float)) and type(value) in (int, float):
        return value
    if isinstance(value, np.ndarray):
        if value.dtype.kind not in "biufc":
            raise TypeError(f"encode_result: arrays of dtype {value.dtype} are not stored")
        arr = np.ascontiguousarray(value)
        return {"__ndarray__": base64.b64encode(arr.tobytes()).decode("ascii"), "dtype": arr.dtype.str,
                "shape": list(arr.shape)}
    if isinstance(value, np.generic):
        if value.dtype.kind not in "biufc":
            raise TypeError(f"encode_result: numpy scalars of dtype {value.dtype} are not stored")
        return {"__scalar__": value.item() if value.dtype.kind != "c" else [value.real, value.imag],
                "dtype": value.dtype.str}
    if isinstance(value, tuple):
        return {"__tuple__": [encode_result(v) for v in value]}
    if isinstance(value, list):
        return [encode_result(v) for v in value]
    if isinstance(value, dict):
        return {"__dict__": [[encode_result(k), encode_result(v)] for k, v in value.items()]}
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        cls = type(value)
        if not cls.__module__.startswith("manireg."):
            raise TypeError(f"encode_result: {cls.__module__}.{cls.__qualname__} is not a manireg result")
        names = [f.name for f in dataclasses.fields(value)]
        extra = {k: v for k, v in getattr(value, "__dict__", {}).items() if k not in names}
        return {"__dataclass__": f"{cls.__module__}:{cls.__qualname__}",
                "fields": {k: encode_result(getattr(value, k)) for k in names},
                "extra": {k: encode_result(v) for k, v in extra.items()}}
    raise TypeError(f"encode_result: cannot store a {type(value).__name__}")


def decode_result(data):
    """The object :func:`encode_result` encoded. Only dataclasses of manireg modules are rebuilt.

    Raises
    ------
    ValueError
        When a stored class is not a manireg dataclass or its fields differ from this version's (a read-out
        stored by another version of the class).
    """
    import base64
    import dataclasses
    import importlib

    import numpy as np

    if isinstance(data, list):
        return [decode_result(v) for v in data]
    if not isinstance(data, dict):
        return data
    if "__ndarray__" in data:
        arr = np.frombuffer(base64.b64decode(data["__ndarray__"]), dtype=np.dtype(data["dtype"]))
        return arr.reshape(data["shape"]).copy()
    if "__scalar__" in data:
        v = data["__scalar__"]
        return np.dtype(data["dtype"]).type(complex(*v) if isinstance(v, list) else v)
    if "__tuple__" in data:
        return tuple(decode_result(v) for v in data["__tuple__"])
    if "__dict__" in data:
        return {decode_result(k): decode_result(v) for k, v in data["__dict__"]}
    if "__dataclass__" in data:
        module, _, qualname = data["__dataclass__"].partition(":")
        if not module.startswith("manireg."):
            raise ValueError(f"decode_result: {module} is not a manireg module")
        obj = importlib.import_module(module)
        for part in qualname.split("."):
            obj = getattr(obj, part)
        cls = obj
        if not (isinstance(cls, type) and dataclasses.is_dataclass(cls)):
            raise ValueError(f"decode_result: {data['__dataclass__']} is not a result class")
        names = {f.name for f in dataclasses.fields(cls)}
        if names != set(data["fields"]):
            raise ValueError(f"decode_result: the fields of {qualname} changed since the result was stored")
        out = cls.__new__(cls)
        for k, v in {**data["fields"], **data.get("extra", {})}.items():
            object.__setattr__(out, k, decode_result(v))
        return out
    raise ValueError("decode_result: an untagged mapping; the stored value was not written by encode_result")


class _Conn:
    """A connection that closes on ``with`` exit (sqlite3's own context manager only commits)."""

    def __init__(self, con):
        self.raw = con

    def execute(self, *a):
        return self.raw.execute(*a)

    def commit(self):
        self.raw.commit()

    def close(self):
        self.raw.close()

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.raw.close()
