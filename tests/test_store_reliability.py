"""The store under stress: a writer killed mid-write, and two processes using the store at once.

A committed transaction survives the writing process being killed at any moment, and readers
and writers in other processes do not block one another in WAL mode (SQLite documentation:
"Atomic Commit In SQLite", "Write-Ahead Logging"; waiting for the write lock: "PRAGMA
busy_timeout").
"""

from __future__ import annotations

import os
import random
import selectors
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

from rtanalyzer.store import SnapshotStore

ROOT = Path(__file__).resolve().parents[1]

# Writes snapshots (with a 4096-point spectrum and tags) in a loop; prints "id uid" after each commit.
WRITER = r"""
import sys, time
import numpy as np
from rtanalyzer.store import CompactSpectrum, Snapshot, SnapshotStore
from rtanalyzer.store.snapshot import iso_utc

path, name, count = sys.argv[1], sys.argv[2], int(sys.argv[3])
levels = np.linspace(-140.0, 0.0, 4096, dtype=np.float32)
with SnapshotStore.open(path) as store:
    if len(sys.argv) > 4:  # start together with the other writer: say so, wait for the word
        sys.stdout.write("ready\n")
        sys.stdout.flush()
        sys.stdin.readline()
    i = 0
    while count < 0 or i < count:
        now = time.time()
        result = {"measurement": "sideband", "worst_sideband_suppression_db": 30.0 + i % 17,
                  "points": [], "seq": i, "writer": name}
        s = Snapshot("sideband", result, iso_utc(now), now, rig=name, note=f"{name} {i}", tags=(name, f"n{i}"),
                     spectrum=CompactSpectrum(levels + i, 0.0, 5.86, 0.732, 1.468, False, 8))
        n = store.add(s)
        sys.stdout.write(f"{n} {s.uid}\n")
        sys.stdout.flush()
        if len(sys.argv) > 4:  # also read, as a window redrawing the timeline would
            store.list(rig=name, limit=20, newest_first=True)
        i += 1
"""


def _env():
    env = dict(os.environ)
    env["PYTHONPATH"] = str(ROOT) + (os.pathsep + env["PYTHONPATH"] if env.get("PYTHONPATH") else "")
    return env


def _writer(path: Path, name: str, count: int = -1, read: bool = False) -> subprocess.Popen:
    args = [sys.executable, "-c", WRITER, str(path), name, str(count)] + (["read"] if read else [])
    return subprocess.Popen(args, stdin=subprocess.PIPE if read else subprocess.DEVNULL, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, env=_env(), cwd=ROOT)


def _lines(proc: subprocess.Popen, until_count: int, timeout: float) -> list[str]:
    """Read whole lines until ``until_count`` arrived or ``timeout`` passed."""
    sel = selectors.DefaultSelector()
    sel.register(proc.stdout, selectors.EVENT_READ)
    lines: list[str] = []
    end = time.monotonic() + timeout
    buffer = b""
    while len(lines) < until_count and time.monotonic() < end:
        if not sel.select(timeout=0.1):
            continue
        chunk = os.read(proc.stdout.fileno(), 65536)
        if not chunk:
            break
        buffer += chunk
        *complete, buffer = buffer.split(b"\n")
        lines += [c.decode() for c in complete]
    sel.close()
    return lines


def test_no_committed_snapshot_is_lost_when_the_writer_is_killed(tmp_path):
    path = tmp_path / "h.sqlite3"
    rng = random.Random(20240517)
    reported: dict[int, str] = {}
    for round_ in range(10):
        proc = _writer(path, f"w{round_}")
        try:
            seen = _lines(proc, 1, timeout=30.0)  # it is writing now
            assert seen, proc.stderr.read().decode() if proc.poll() is not None else "writer printed nothing"
            time.sleep(rng.uniform(0.0, 0.25))  # then kill it wherever it is
        finally:
            proc.send_signal(signal.SIGKILL)
        out, err = proc.communicate(timeout=30)
        assert proc.returncode == -signal.SIGKILL
        for line in seen + out.decode().split("\n")[:-1]:  # the last piece may be cut mid-line
            n, uid = line.split()
            reported[int(n)] = uid
    assert len(reported) >= 10
    with SnapshotStore.open(path) as store:
        assert store._conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"  # (SQLite documentation)
        stored = {s.id: s for s in store.list(with_spectra=True)}
        for n, uid in reported.items():
            s = stored[n]
            assert s.uid == uid
            seq = s.result["seq"]
            assert s.tags == tuple(sorted((s.rig, f"n{seq}"))) and s.note == f"{s.rig} {seq}"
            assert s.spectrum is not None and float(s.spectrum.levels_db[0]) == -140.0 + seq
        # a snapshot is all there or not there: no orphan tags or spectra
        orphans = store._conn.execute(
            "SELECT (SELECT count(*) FROM tags WHERE snapshot_id NOT IN (SELECT id FROM snapshots)) + "
            "(SELECT count(*) FROM spectra WHERE snapshot_id NOT IN (SELECT id FROM snapshots))"
        ).fetchone()[0]
        assert orphans == 0


def test_two_processes_write_and_read_at_once_without_lock_errors(tmp_path):
    path = tmp_path / "h.sqlite3"
    SnapshotStore.open(path).close()
    procs = [_writer(path, name, 40, read=True) for name in ("gui", "cli")]
    for p in procs:
        assert _lines(p, 1, timeout=30.0) == ["ready"], p.stderr.read().decode() if p.poll() is not None else ""
    for p in procs:  # go, both at once
        p.stdin.write(b"\n")
        p.stdin.flush()
    reads = 0
    with SnapshotStore.open(path) as reader:  # a third party reading all the while
        while any(p.poll() is None for p in procs):
            reader.list(limit=50, newest_first=True)
            reads += 1
            time.sleep(0.01)
    for p in procs:
        out, err = p.communicate(timeout=60)
        assert p.returncode == 0, err.decode()
        assert b"locked" not in err and len(out.decode().split()) == 80  # 40 lines of "id uid"
    with SnapshotStore.open(path) as store:
        assert store.count(rig="gui") == 40 and store.count(rig="cli") == 40
        spans = [[s.created_epoch for s in store.list(rig=name)] for name in ("gui", "cli")]
    assert max(min(s) for s in spans) < min(max(s) for s in spans), "the writers did not overlap in time"
    assert reads > 0


def test_a_held_write_lock_is_waited_for_not_failed(tmp_path):
    path = tmp_path / "h.sqlite3"
    SnapshotStore.open(path).close()
    blocker = sqlite3.connect(path, isolation_level=None)
    blocker.execute("BEGIN IMMEDIATE")  # another process holding the write lock
    proc = _writer(path, "late", 1)
    time.sleep(1.0)
    assert proc.poll() is None  # waiting under the busy timeout, not failed
    blocker.execute("COMMIT")
    out, err = proc.communicate(timeout=60)
    assert proc.returncode == 0, err.decode()
    assert len(out.split()) == 2
