"""The history store: one SQLite file of snapshots, safe to share between processes.

Durability and sharing (SQLite documentation: "Write-Ahead Logging", "PRAGMA synchronous",
"File Locking And Concurrency"):

- WAL journal: readers never block the writer nor the writer the readers, so the window can
  redraw the history while a terminal session saves into it.
- ``synchronous = FULL``: each commit is flushed to the disk before ``add`` returns. With WAL,
  NORMAL would already survive the program being killed, but a power cut or an OS crash could
  roll back the last commits; a snapshot is taken at most about once a second, so one flush
  per commit costs nothing a person notices and no committed snapshot is lost.
- Every write is one ``BEGIN IMMEDIATE`` transaction: it takes the write lock at its start and
  waits for it under the busy timeout, where a deferred transaction that reads first and then
  writes can fail at once with "database is locked".
- A busy timeout of 30 s: another process holding the store waits, it does not fail.

The file is checked before anything is written to it: a file that is not SQLite, an SQLite
database of another program, or a damaged one raises :class:`StoreUnusable` and is left as it
is. :func:`back_up_unusable` moves it aside (never deletes it) so a new store can start.
"""

from __future__ import annotations

import contextlib
import functools
import json
import os
import sqlite3
from datetime import datetime, timezone
from pathlib import Path
from typing import Any, Iterable, Iterator, Sequence

from rtanalyzer.store.errors import StoreError, StoreUnusable
from rtanalyzer.store.schema import APPLICATION_ID, CURRENT_VERSION, migrate
from rtanalyzer.store.snapshot import (
    FIGURE_BITS,
    IMD_ORDERS,
    NUMBER_FIELDS,
    TEXT_FIELDS,
    Snapshot,
    SnapshotSummary,
    bound_flags,
    check_name,
    check_note,
    key_figures,
)
from rtanalyzer.store.spectrum import CompactSpectrum

#: Environment variable naming the store file (the --store option wins over it).
STORE_ENV = "RTANALYZER_STORE"
STORE_NAME = "history.sqlite3"
BUSY_TIMEOUT_S = 30.0
_SQLITE_MAGIC = b"SQLite format 3\x00"
_KEY_COLUMNS = (
    "worst_sideband_suppression_db",
    "carrier_suppression_db",
    "worst_imd_db_pep",
    *(f"imd{order}_worst_db_pep" for order in IMD_ORDERS),
)
_SNAPSHOT_COLUMNS = (
    "id", "uid", "created_utc", "created_epoch", "rig", "origin", "measurement", "source", "device",
    "sample_rate_hz", "plan_json", "generator_json", "setup_json", "result_json", "clipped",
    "levels_json", "xruns_json", "note", "calibration_json",
)
_TAG_SEPARATOR = "\x1f"


def default_store_path() -> Path:
    """``$RTANALYZER_STORE`` if set, else history.sqlite3 in the user's data folder."""
    override = os.environ.get(STORE_ENV)
    if override:
        return Path(override).expanduser()
    from platformdirs import user_data_dir

    return Path(user_data_dir("rtanalyzer", appauthor=False)) / STORE_NAME


def _check_file(path: Path) -> bool:
    """True when ``path`` exists and holds data; StoreUnusable when it cannot be a store."""
    if not path.exists():
        return False
    if not path.is_file():
        raise StoreUnusable(path, "it is not a regular file")
    try:
        with open(path, "rb") as f:
            head = f.read(len(_SQLITE_MAGIC))
    except OSError as exc:
        raise StoreError(f"cannot read the store {path}: {exc.strerror or exc}") from None
    if not head:
        return False  # an empty file: a new store may start in it
    if head != _SQLITE_MAGIC:
        return _not_sqlite(path, head)
    return True


def _not_sqlite(path: Path, head: bytes) -> bool:
    try:
        head.decode("utf-8")
        what = "it is a text file, not an SQLite database"
    except UnicodeDecodeError:
        what = "it is not an SQLite database (unknown bytes)"
    raise StoreUnusable(path, what)


def back_up_unusable(path: Path) -> Path:
    """Rename an unusable store (and any -wal/-shm beside it) to FILE.bak-<UTC time>; return the new name.

    Nothing is deleted; an existing backup name gets a counter.
    """
    path = Path(path)
    stamp = datetime.now(timezone.utc).strftime("%Y%m%dT%H%M%SZ")
    target = path.with_name(f"{path.name}.bak-{stamp}")
    n = 1
    while target.exists():
        target = path.with_name(f"{path.name}.bak-{stamp}-{n}")
        n += 1
    try:
        os.replace(path, target)
        for suffix in ("-wal", "-shm"):
            side = path.with_name(path.name + suffix)
            if side.exists():
                os.replace(side, target.with_name(target.name + suffix))
    except OSError as exc:
        raise StoreError(f"cannot move {path} aside to {target}: {exc.strerror or exc}") from None
    return target


class SnapshotStore:
    """Snapshots in one SQLite file.

    Open with :meth:`open`; use as a context manager or call :meth:`close`. One object is
    meant for one thread; each process or thread opens its own.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> from rtanalyzer.store.snapshot import Snapshot
    >>> path = pathlib.Path(tempfile.mkdtemp()) / "h.sqlite3"
    >>> with SnapshotStore.open(path) as store:
    ...     n = store.add(Snapshot("sideband", {"worst_sideband_suppression_db": 41.2},
    ...                            "2025-01-01T00:00:00.000Z", 1735689600.0, tags=("before",)))
    ...     store.get(n).tags, [s.id for s in store.list(tags=["before"])] == [n]
    (('before',), True)
    """

    def __init__(self, conn: sqlite3.Connection, path: Path) -> None:
        self._conn = conn
        self.path = path

    # -- opening ---------------------------------------------------------------------------------

    @classmethod
    def open(cls, path: str | os.PathLike[str] | None = None, create: bool = True,
             timeout_s: float = BUSY_TIMEOUT_S) -> SnapshotStore:
        """Open (and with ``create``, make or bring up to date) the store at ``path``.

        Parameters
        ----------
        path : path-like, optional
            Default :func:`default_store_path`.
        create : bool
            Make the file when it does not exist; else raise StoreError.
        timeout_s : float
            How long to wait for another process holding the write lock.

        Raises
        ------
        StoreUnusable
            The file is not an rtanalyzer history (not SQLite, another program's database,
            damaged). It is left unchanged.
        StoreError
            The file is missing (``create=False``), cannot be made, or was written by a newer
            rtanalyzer.
        """
        path = Path(path).expanduser() if path is not None else default_store_path()
        has_data = _check_file(path)
        if not has_data and not path.exists():
            if not create:
                raise StoreError(f"there is no history store at {path} yet: save a snapshot first (--save)")
            try:
                path.parent.mkdir(parents=True, exist_ok=True)
            except OSError as exc:
                raise StoreError(f"cannot make the folder of the store {path.parent}: {exc.strerror or exc}") from None
        try:
            conn = sqlite3.connect(str(path), timeout=timeout_s, isolation_level=None)
        except sqlite3.Error as exc:
            raise StoreError(f"cannot open the store {path}: {exc}") from None
        try:
            cls._prepare(conn, path, timeout_s)
        except BaseException:
            conn.close()
            raise
        return cls(conn, path)

    @staticmethod
    def _prepare(conn: sqlite3.Connection, path: Path, timeout_s: float) -> None:
        try:
            conn.execute(f"PRAGMA busy_timeout = {int(timeout_s * 1000)}")
            app_id, version, tables = _identity(conn)
        except sqlite3.DatabaseError as exc:
            raise StoreUnusable(path, f"SQLite cannot read it ({exc})") from None
        if app_id != APPLICATION_ID and (app_id != 0 or tables):
            raise StoreUnusable(path, "it is an SQLite database of another program (no rtanalyzer history in it)")
        if version > CURRENT_VERSION:
            raise StoreError(
                f"the store {path} was written by a newer rtanalyzer (layout version {version}; this "
                f"one reads up to {CURRENT_VERSION}): update rtanalyzer"
            )
        try:
            mode = conn.execute("PRAGMA journal_mode = WAL").fetchone()[0]
            if str(mode).lower() != "wal":
                raise StoreError(f"the store {path} cannot use SQLite's write-ahead log here (journal mode {mode})")
            conn.execute("PRAGMA synchronous = FULL")
            conn.execute("PRAGMA foreign_keys = ON")
            if version < CURRENT_VERSION:
                with _transaction(conn):
                    # Read again under the write lock: another process may have migrated meanwhile.
                    app_id, version, tables = _identity(conn)
                    if app_id != APPLICATION_ID and tables:
                        raise StoreUnusable(path, "it is an SQLite database of another program")
                    migrate(conn, version)
        except sqlite3.OperationalError as exc:
            raise _operational(exc, path) from None
        except sqlite3.DatabaseError as exc:
            raise StoreUnusable(path, f"SQLite cannot read it ({exc})") from None

    def close(self) -> None:
        self._conn.close()

    def __enter__(self) -> SnapshotStore:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    @property
    def version(self) -> int:
        return int(self._conn.execute("PRAGMA user_version").fetchone()[0])

    # -- writing ---------------------------------------------------------------------------------

    @contextlib.contextmanager
    def _write(self) -> Iterator[sqlite3.Connection]:
        with self._guard(), _transaction(self._conn):
            yield self._conn

    @contextlib.contextmanager
    def _guard(self) -> Iterator[None]:
        try:
            yield
        except sqlite3.OperationalError as exc:
            raise _operational(exc, self.path) from None
        except sqlite3.DatabaseError as exc:
            raise StoreUnusable(self.path, f"SQLite cannot read it ({exc})") from None

    def add(self, snapshot: Snapshot, keep_id: bool = False) -> int:
        """Store ``snapshot`` (its ``id`` is ignored unless ``keep_id``); return its id once committed."""
        with self._write() as c:
            return self._insert(c, snapshot, keep_id)

    def add_many(self, snapshots: Iterable[Snapshot], keep_ids: bool = False) -> list[int | None]:
        """Store several in one transaction (all or none). A snapshot whose ``uid`` is already
        stored is skipped (None in the returned list); with ``keep_ids`` a snapshot keeps its id
        when that id is free."""
        out: list[int | None] = []
        with self._write() as c:
            for snapshot in snapshots:
                if c.execute("SELECT 1 FROM snapshots WHERE uid = ?", (snapshot.uid,)).fetchone():
                    out.append(None)
                    continue
                keep = keep_ids and snapshot.id is not None and not c.execute(
                    "SELECT 1 FROM snapshots WHERE id = ?", (snapshot.id,)).fetchone()
                out.append(self._insert(c, snapshot, keep))
        return out

    def _insert(self, c: sqlite3.Connection, s: Snapshot, keep_id: bool) -> int:
        figures = key_figures(s.result)
        values: dict[str, Any] = {
            **{f: getattr(s, f) for f in (*TEXT_FIELDS, *NUMBER_FIELDS)},
            "plan_json": _dump(s.plan),
            "generator_json": None if s.generator is None else _dump(s.generator),
            "setup_json": _dump(s.setup),
            "result_json": _dump(s.result),
            "clipped": int(bool(s.clipped)),
            "levels_json": None if s.levels is None else _dump(s.levels),
            "xruns_json": _dump(s.xruns),
            "note": s.note,
            "calibration_json": _dump(list(s.calibration)),
            **{k: figures[k] for k in _KEY_COLUMNS},
            "bound_flags": bound_flags(s.result),
        }
        if keep_id and s.id is not None:
            values["id"] = int(s.id)
        names = ", ".join(values)
        marks = ", ".join("?" for _ in values)
        try:
            cur = c.execute(f"INSERT INTO snapshots ({names}) VALUES ({marks})", list(values.values()))
        except sqlite3.IntegrityError as exc:
            raise StoreError(f"cannot store snapshot {s.uid}: {exc}") from None
        new_id = int(cur.lastrowid)
        c.executemany("INSERT INTO tags (snapshot_id, tag) VALUES (?, ?)", [(new_id, t) for t in s.tags])
        if s.spectrum is not None:
            sp = s.spectrum
            c.execute(
                "INSERT INTO spectra (snapshot_id, start_hz, step_hz, bin_hz, enbw_hz, is_complex, pooled, levels_db)"
                " VALUES (?, ?, ?, ?, ?, ?, ?, ?)",
                (new_id, sp.start_hz, sp.step_hz, sp.bin_hz, sp.enbw_hz, int(sp.is_complex), sp.pooled, sp.to_bytes()),
            )
        return new_id

    def set_note(self, snapshot_id: int, note: str) -> None:
        check_note(note)
        with self._write() as c:
            self._require(c, snapshot_id)
            c.execute("UPDATE snapshots SET note = ? WHERE id = ?", (note, snapshot_id))

    def add_tag(self, snapshot_id: int, tag: str) -> bool:
        """Tag a snapshot; False when it already had the tag."""
        check_name("tag", tag)
        with self._write() as c:
            self._require(c, snapshot_id)
            cur = c.execute("INSERT OR IGNORE INTO tags (snapshot_id, tag) VALUES (?, ?)", (snapshot_id, tag))
            return cur.rowcount == 1

    def remove_tag(self, snapshot_id: int, tag: str) -> bool:
        """Remove a tag; False when the snapshot did not have it."""
        with self._write() as c:
            self._require(c, snapshot_id)
            cur = c.execute("DELETE FROM tags WHERE snapshot_id = ? AND tag = ?", (snapshot_id, tag))
            return cur.rowcount == 1

    def delete(self, snapshot_id: int) -> None:
        """Delete a snapshot with its tags and spectrum."""
        with self._write() as c:
            self._require(c, snapshot_id)
            c.execute("DELETE FROM snapshots WHERE id = ?", (snapshot_id,))

    @staticmethod
    def _require(c: sqlite3.Connection, snapshot_id: int) -> None:
        if not c.execute("SELECT 1 FROM snapshots WHERE id = ?", (int(snapshot_id),)).fetchone():
            raise StoreError(f"there is no snapshot #{snapshot_id}")

    # -- reading ---------------------------------------------------------------------------------

    def get(self, snapshot_id: int, with_spectrum: bool = True) -> Snapshot:
        """The snapshot with this id (and its spectrum); StoreError when there is none."""
        found = self.list(ids=[int(snapshot_id)], with_spectra=with_spectrum)
        if not found:
            raise StoreError(f"there is no snapshot #{snapshot_id} in {self.path}")
        return found[0]

    def list(
        self,
        rig: str | None = None,
        tags: Sequence[str] | str | None = None,
        since: float | None = None,
        until: float | None = None,
        measurement: str | None = None,
        ids: Sequence[int] | None = None,
        limit: int | None = None,
        newest_first: bool = False,
        with_spectra: bool = False,
    ) -> list[Snapshot]:
        """Snapshots matching every filter given, oldest first (or newest first).

        Parameters
        ----------
        rig, measurement : str, optional
            Exact names.
        tags : str or sequence of str, optional
            The snapshot must carry every one of them.
        since, until : float, optional
            Epoch seconds (UTC): ``since <= time < until``.
        ids : sequence of int, optional
        limit : int, optional
            At most this many (the newest when ``newest_first``).
        with_spectra : bool
            Load the stored spectra too (slower for long lists).
        """
        columns = ", ".join(f"s.{c}" for c in _SNAPSHOT_COLUMNS)
        sql, params = self._select(columns, (rig, tags, since, until, measurement, ids), limit, newest_first)
        with self._guard():
            rows = self._conn.execute(sql, params).fetchall()
            snapshots = [_from_row(r) for r in rows]
            if with_spectra and snapshots:
                spectra = self._spectra([s.id for s in snapshots])
                snapshots = [s.with_changes(spectrum=spectra.get(s.id)) if s.id in spectra else s for s in snapshots]
        return snapshots

    def _select(self, columns: str, filters: tuple, limit: int | None, newest_first: bool) -> tuple[str, list]:
        """SELECT ``columns`` and the tag list of the snapshots the filters keep, in time order."""
        where, params = self._where(*filters)
        order = "DESC" if newest_first else "ASC"
        sql = (
            f"SELECT {columns}, (SELECT group_concat(tag, '{_TAG_SEPARATOR}') FROM tags t WHERE t.snapshot_id = s.id)"
            f" FROM snapshots s {where} ORDER BY s.created_epoch {order}, s.id {order}"
        )
        if limit is not None:
            sql += " LIMIT ?"
            params.append(int(limit))
        return sql, params

    def summaries(
        self,
        rig: str | None = None,
        tags: Sequence[str] | str | None = None,
        since: float | None = None,
        until: float | None = None,
        measurement: str | None = None,
        ids: Sequence[int] | None = None,
        limit: int | None = None,
        newest_first: bool = False,
    ) -> list[SnapshotSummary]:
        """Timeline lines (time, rig, key figures, tags, note) from the columns only; filters as :meth:`list`.

        Much faster than :meth:`list` for long histories: no measurement JSON is read.
        """
        columns = (
            "s.id, s.created_utc, s.created_epoch, s.rig, s.measurement, s.origin, s.source, s.device, s.note, "
            f"s.bound_flags, {', '.join('s.' + c for c in _KEY_COLUMNS)}"
        )
        sql, params = self._select(columns, (rig, tags, since, until, measurement, ids), limit, newest_first)
        out = []
        with self._guard():
            for r in self._conn.execute(sql, params):
                flags = r[9]
                figures = dict(zip(_KEY_COLUMNS, r[10:10 + len(_KEY_COLUMNS)]))
                out.append(SnapshotSummary(
                    id=r[0], created_utc=r[1], created_epoch=r[2], rig=r[3], measurement=r[4], origin=r[5],
                    source=r[6], device=r[7], note=r[8], figures=figures,
                    bounds=_bounds(flags),
                    tags=tuple(sorted(r[-1].split(_TAG_SEPARATOR))) if r[-1] else (),
                ))
        return out

    def count(self, **filters: Any) -> int:
        where, params = self._where(
            filters.get("rig"), filters.get("tags"), filters.get("since"), filters.get("until"),
            filters.get("measurement"), filters.get("ids"),
        )
        with self._guard():
            return int(self._conn.execute(f"SELECT count(*) FROM snapshots s {where}", params).fetchone()[0])

    @staticmethod
    def _where(rig, tags, since, until, measurement, ids) -> tuple[str, list[Any]]:
        clauses, params = [], []
        if rig is not None:
            clauses.append("s.rig = ?")
            params.append(rig)
        if measurement is not None:
            clauses.append("s.measurement = ?")
            params.append(measurement)
        if since is not None:
            clauses.append("s.created_epoch >= ?")
            params.append(float(since))
        if until is not None:
            clauses.append("s.created_epoch < ?")
            params.append(float(until))
        for tag in [tags] if isinstance(tags, str) else (tags or ()):
            clauses.append("s.id IN (SELECT snapshot_id FROM tags WHERE tag = ?)")
            params.append(tag)
        if ids is not None:
            ids = [int(i) for i in ids]
            clauses.append("s.id IN (SELECT value FROM json_each(?))")
            params.append(json.dumps(ids))
        return ("WHERE " + " AND ".join(clauses)) if clauses else "", params

    def _spectra(self, ids: Sequence[int]) -> dict[int, CompactSpectrum]:
        rows = self._conn.execute(
            "SELECT snapshot_id, start_hz, step_hz, bin_hz, enbw_hz, is_complex, pooled, levels_db FROM spectra"
            " WHERE snapshot_id IN (SELECT value FROM json_each(?))",
            (json.dumps(list(ids)),),
        ).fetchall()
        return {
            r[0]: CompactSpectrum(CompactSpectrum.levels_from_bytes(r[7]), r[1], r[2], r[3], r[4], bool(r[5]), r[6])
            for r in rows
        }

    def rigs(self) -> list[str]:
        with self._guard():
            return [r[0] for r in self._conn.execute("SELECT DISTINCT rig FROM snapshots ORDER BY rig")]

    def tags(self) -> dict[str, int]:
        """Every tag in use and how many snapshots carry it."""
        with self._guard():
            return dict(self._conn.execute("SELECT tag, count(*) FROM tags GROUP BY tag ORDER BY tag").fetchall())

    def select(self, selector: str | int, with_spectra: bool = True) -> list[Snapshot]:
        """One snapshot by id (``12`` or ``"#12"``) or a group by tag (``"tag:before"``)."""
        text = str(selector).strip()
        if text.startswith("tag:"):
            tag = text[4:]
            found = self.list(tags=[tag], with_spectra=with_spectra)
            if not found:
                known = ", ".join(self.tags()) or "none yet"
                raise StoreError(f"no snapshot has the tag {tag!r} (tags in use: {known})")
            return found
        return [self.get(parse_id(text), with_spectrum=with_spectra)]


def parse_id(text: str | int) -> int:
    """A snapshot id from ``12`` or ``#12``; StoreError naming the bad text otherwise."""
    raw = str(text).strip().lstrip("#")
    if not raw.isdigit() or int(raw) < 1:
        raise StoreError(f"{text!r} is not a snapshot: give its number (e.g. 12 or #12) or tag:NAME for a group")
    return int(raw)


@functools.lru_cache(maxsize=None)
def _bounds(flags: int) -> frozenset[str]:
    return frozenset(k for k, bit in FIGURE_BITS.items() if flags & bit)


@contextlib.contextmanager
def _transaction(conn: sqlite3.Connection) -> Iterator[None]:
    conn.execute("BEGIN IMMEDIATE")
    try:
        yield
    except BaseException:
        with contextlib.suppress(sqlite3.Error):
            conn.execute("ROLLBACK")
        raise
    conn.execute("COMMIT")


def _identity(conn: sqlite3.Connection) -> tuple[int, int, int]:
    app_id = int(conn.execute("PRAGMA application_id").fetchone()[0])
    version = int(conn.execute("PRAGMA user_version").fetchone()[0])
    tables = int(conn.execute("SELECT count(*) FROM sqlite_master").fetchone()[0])
    return app_id, version, tables


def _operational(exc: sqlite3.OperationalError, path: Path) -> StoreError:
    text = str(exc)
    if "locked" in text or "busy" in text:
        return StoreError(f"the store {path} stayed busy (another rtanalyzer is writing to it); try again")
    if "readonly" in text or "read-only" in text:
        return StoreError(f"the store {path} cannot be written (read-only file or folder)")
    if "disk" in text and "full" in text:
        return StoreError(f"the disk holding the store {path} is full")
    if "unable to open" in text:
        return StoreError(f"cannot open the store {path} (check the folder exists and can be written)")
    return StoreError(f"the store {path}: {text}")


def _dump(value: Any) -> str:
    try:
        return json.dumps(value, allow_nan=False, separators=(",", ":"))
    except (TypeError, ValueError) as exc:
        raise StoreError(f"cannot store {type(value).__name__} value: {exc}") from None


def _from_row(r: Sequence[Any]) -> Snapshot:
    (sid, uid, created_utc, created_epoch, rig, origin, measurement, source, device, rate, plan, generator,
     setup, result, clipped, levels, xruns, note, calibration, tags) = r
    return Snapshot._trusted(
        measurement=measurement,
        result=json.loads(result),
        created_utc=created_utc,
        created_epoch=created_epoch,
        rig=rig,
        origin=origin,
        source=source,
        device=device,
        sample_rate_hz=rate,
        plan=json.loads(plan),
        generator=None if generator is None else json.loads(generator),
        setup=json.loads(setup),
        calibration=tuple(json.loads(calibration)),
        clipped=bool(clipped),
        levels=None if levels is None else json.loads(levels),
        xruns=json.loads(xruns),
        note=note,
        tags=tuple(sorted(tags.split(_TAG_SEPARATOR))) if tags else (),
        spectrum=None,
        id=sid,
        uid=uid,
    )
