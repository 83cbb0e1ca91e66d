"""Migration of result stores written by earlier versions, one step per schema version.

Schema 0 -> 1 (stores written before the campaign vocabulary). A schema-0 store names the saved learning-curve unit with the words listed in ``LEGACY_TABLE`` and
``LEGACY_COLUMN`` (they appear here and nowhere else: a migration has to read them), keeps ``d``, ``s`` and ``D``
under one-letter keys and the validation share under ``val_fraction``. The migration, in one transaction:

1. copies the file to ``<store>.before-migration`` (never overwriting an earlier copy);
2. renames the unit's table and columns, and rewrites each metadata record under the new keys;
3. rewrites each cell's configuration under the new keys and recomputes its key (the SHA-256 of the
   canonical configuration), so a campaign run again with the same settings finds its finished cells;
4. sets ``PRAGMA user_version`` to the new schema.

Schema 1 -> 2 adds the ``geometry`` table (the geometry read-out cached by data fingerprint and settings,
see :meth:`manireg.curves.store.ResultStore.geometry`); nothing else changes, so no copy is kept.

Every row is kept; a failure rolls the transaction back and leaves the store as it was.
"""

from __future__ import annotations

import json
import os
import shutil
import sqlite3

__all__ = ["migrate_store", "LEGACY_TABLE", "LEGACY_COLUMN", "GEOMETRY_TABLE_SQL"]

LEGACY_TABLE = "studies"
LEGACY_COLUMN = "study"

#: The table of cached geometry read-outs (schema 2); the store creates it with this statement too.
GEOMETRY_TABLE_SQL = (
    "CREATE TABLE IF NOT EXISTS geometry (key TEXT PRIMARY KEY, fingerprint TEXT NOT NULL, settings_json TEXT, "
    "manireg_version TEXT, summary BLOB NOT NULL, notes_json TEXT, created_at TEXT)"
)

_META_KEYS = {LEGACY_COLUMN: "campaign", "d": "dimension", "s": "smoothness", "D": "ambient_dim",
              "d_source": "dimension_source"}
_SPEC_KEYS = {"d": "dimension", "s": "smoothness", "label": "name", "val_fraction": "validation_fraction"}


def _renamed(obj, mapping):
    return {mapping.get(k, k): v for k, v in obj.items()} if isinstance(obj, dict) else obj


def _meta(meta: dict) -> dict:
    meta = _renamed(meta, _META_KEYS)
    if isinstance(meta.get("spec"), dict):
        meta["spec"] = _renamed(meta["spec"], _SPEC_KEYS)
    return meta


def _config(config: dict) -> dict:
    config = _renamed(config, {LEGACY_COLUMN: "campaign", "d": "dimension", "s": "smoothness"})
    if isinstance(config.get("split"), dict):
        config["split"] = _renamed(config["split"], {"val_fraction": "validation_fraction"})
    return config


def _step_0_to_1(con):
    """Rename the unit's table and columns; rewrite metadata and cell configurations; recompute cell keys."""
    from manireg.curves.sweep import _hash

    con.execute(f'ALTER TABLE cells RENAME COLUMN "{LEGACY_COLUMN}" TO campaign')
    con.execute(f"DROP INDEX IF EXISTS cells_{LEGACY_COLUMN}")
    con.execute(f'ALTER TABLE "{LEGACY_TABLE}" RENAME TO campaigns')
    for old, new in ((LEGACY_COLUMN, "campaign"), ("d", "dimension"), ("s", "smoothness")):
        con.execute(f'ALTER TABLE campaigns RENAME COLUMN "{old}" TO "{new}"')
    n_campaigns = 0
    for name, meta_json, spec_json in con.execute("SELECT campaign, meta_json, spec_json FROM campaigns").fetchall():
        meta = _meta(json.loads(meta_json)) if meta_json else {}
        spec = _renamed(json.loads(spec_json), _SPEC_KEYS) if spec_json else None
        con.execute("UPDATE campaigns SET meta_json = ?, spec_json = ? WHERE campaign = ?",
                    (json.dumps(meta, sort_keys=True), json.dumps(spec, sort_keys=True), name))
        n_campaigns += 1
    n_cells = 0
    for key, config_json in con.execute("SELECT key, config_json FROM cells").fetchall():
        if not config_json:
            continue
        config = _config(json.loads(config_json))
        con.execute("UPDATE cells SET key = ?, config_json = ? WHERE key = ?",
                    (_hash(config), json.dumps(config, sort_keys=True), key))
        n_cells += 1
    return n_cells, n_campaigns


def _step_1_to_2(con):
    """Add the table of cached geometry read-outs."""
    con.execute(GEOMETRY_TABLE_SQL)


def _version(con) -> int:
    return int(con.execute("PRAGMA user_version").fetchone()[0])


def migrate_store(path) -> dict:
    """Migrate a store of an older schema in place, step by step up to the current one, in one transaction.

    Returns counts ``{"cells": ..., "campaigns": ..., "backup": path or None, "from_version": v}``: ``cells`` and
    ``campaigns`` count the records rewritten by the 0 -> 1 step, which alone keeps a copy of the file first.
    """
    from manireg.curves.store import SCHEMA_VERSION

    path = os.fspath(path)
    con = sqlite3.connect(path, isolation_level=None)
    try:
        start = _version(con)
        legacy = con.execute("SELECT 1 FROM sqlite_master WHERE type = 'table' AND name = ?",
                             (LEGACY_TABLE,)).fetchone() is not None
        backup = None
        if start == 0 and legacy:
            con.execute("PRAGMA wal_checkpoint(TRUNCATE)")
            backup = path + ".before-migration"
            if not os.path.exists(backup):
                shutil.copy2(path, backup)
        con.execute("BEGIN IMMEDIATE")
        try:
            n_cells = n_campaigns = 0
            if start == 0 and legacy:
                n_cells, n_campaigns = _step_0_to_1(con)
            if start <= 1:
                _step_1_to_2(con)
            con.execute(f"PRAGMA user_version = {SCHEMA_VERSION}")
            con.execute("COMMIT")
        except BaseException:
            con.execute("ROLLBACK")
            raise
    finally:
        con.close()
    return {"cells": n_cells, "campaigns": n_campaigns, "backup": backup, "from_version": start}
