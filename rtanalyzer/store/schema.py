"""The store's SQLite layout and the steps that bring an older file up to date.

The layout's version is the file's ``PRAGMA user_version``; ``PRAGMA application_id`` marks the
file as an rtanalyzer history so another program's database is never taken for ours (both are
fields of the SQLite file header; SQLite documentation, "Database File Format").

To change the layout, append a step to :data:`MIGRATIONS`; never edit a step that has shipped.
A step receives a connection inside an open write transaction, so a step that fails leaves the
file at the version it had.
"""

from __future__ import annotations

import json
import sqlite3
from typing import Callable

from rtanalyzer.store.snapshot import IMD_ORDERS, bound_flags, key_figures

#: "rtAh" as a big-endian 32-bit integer: marks the file as an rtanalyzer history.
APPLICATION_ID = 0x72744168

_V1 = (
    """CREATE TABLE snapshots (
        -- AUTOINCREMENT: the id of a deleted snapshot is never given again, so "#12" in a
        -- note or a report keeps meaning one snapshot.
        id INTEGER PRIMARY KEY AUTOINCREMENT,
        uid TEXT NOT NULL UNIQUE,
        created_utc TEXT NOT NULL,
        created_epoch REAL NOT NULL,
        rig TEXT NOT NULL,
        origin TEXT NOT NULL,
        measurement TEXT NOT NULL,
        source TEXT NOT NULL,
        device TEXT NOT NULL,
        sample_rate_hz REAL NOT NULL,
        plan_json TEXT NOT NULL,
        generator_json TEXT,
        setup_json TEXT NOT NULL,
        result_json TEXT NOT NULL,
        clipped INTEGER NOT NULL,
        levels_json TEXT,
        xruns_json TEXT NOT NULL,
        note TEXT NOT NULL DEFAULT '',
        worst_sideband_suppression_db REAL,
        carrier_suppression_db REAL,
        worst_imd_db_pep REAL
    )""",
    """CREATE TABLE tags (
        snapshot_id INTEGER NOT NULL REFERENCES snapshots(id) ON DELETE CASCADE,
        tag TEXT NOT NULL,
        PRIMARY KEY (snapshot_id, tag)
    ) WITHOUT ROWID""",
    # Spectra apart from the figures: a list reads dense rows and never touches the blobs.
    """CREATE TABLE spectra (
        snapshot_id INTEGER PRIMARY KEY REFERENCES snapshots(id) ON DELETE CASCADE,
        start_hz REAL NOT NULL,
        step_hz REAL NOT NULL,
        bin_hz REAL NOT NULL,
        enbw_hz REAL NOT NULL,
        is_complex INTEGER NOT NULL,
        pooled INTEGER NOT NULL,
        levels_db BLOB NOT NULL
    )""",
    "CREATE INDEX tags_by_tag ON tags(tag, snapshot_id)",
    "CREATE INDEX snapshots_by_time ON snapshots(created_epoch, id)",
    "CREATE INDEX snapshots_by_rig ON snapshots(rig, created_epoch)",
    "CREATE INDEX snapshots_by_measurement ON snapshots(measurement, created_epoch)",
    f"PRAGMA application_id = {APPLICATION_ID}",
)


def _v1(conn: sqlite3.Connection) -> None:
    """Version 1, the first layout: snapshots, tags, spectra; three key figures as columns."""
    for statement in _V1:
        conn.execute(statement)


def _v2(conn: sqlite3.Connection) -> None:
    """Version 2: calibration profiles in force; the worst IMD of each order as columns, and
    which key figures are only bounds (``bound_flags``), so a timeline needs no JSON.

    The new columns of snapshots already stored are filled from their measurement JSON.
    """
    conn.execute("ALTER TABLE snapshots ADD COLUMN calibration_json TEXT NOT NULL DEFAULT '[]'")
    for order in IMD_ORDERS:
        conn.execute(f"ALTER TABLE snapshots ADD COLUMN imd{order}_worst_db_pep REAL")
    conn.execute("ALTER TABLE snapshots ADD COLUMN bound_flags INTEGER NOT NULL DEFAULT 0")
    rows = conn.execute("SELECT id, result_json FROM snapshots").fetchall()
    columns = [f"imd{order}_worst_db_pep" for order in IMD_ORDERS]
    assignments = ", ".join(f"{c} = ?" for c in columns)
    for snapshot_id, text in rows:
        result = json.loads(text)
        figures = key_figures(result)
        conn.execute(f"UPDATE snapshots SET {assignments}, bound_flags = ? WHERE id = ?",
                     [figures[c] for c in columns] + [bound_flags(result), snapshot_id])
    conn.execute("CREATE INDEX snapshots_by_sideband ON snapshots(measurement, worst_sideband_suppression_db)")
    conn.execute("CREATE INDEX snapshots_by_imd ON snapshots(measurement, worst_imd_db_pep)")


#: (version reached, what it changes, step). Version N is reached by running steps 1..N in order.
MIGRATIONS: tuple[tuple[int, str, Callable[[sqlite3.Connection], None]], ...] = (
    (1, "first layout: snapshots, tags, spectra", _v1),
    (2, "calibration profiles; worst IMD per order as columns", _v2),
)
CURRENT_VERSION = MIGRATIONS[-1][0]


def migrate(conn: sqlite3.Connection, version: int) -> int:
    """Run the steps after ``version`` on an open write transaction; return the new version."""
    for target, _, step in MIGRATIONS:
        if target > version:
            step(conn)
            conn.execute(f"PRAGMA user_version = {int(target)}")
            version = target
    return version
