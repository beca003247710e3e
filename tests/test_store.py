"""The history store: snapshots in, snapshots out, filters, edits, layout versions, bad files.

Builders at the top (``sideband_result``, ``twotone_result``, ``snapshot``) are also imported by
the other ``test_store_*`` and ``test_history*`` files.
"""

from __future__ import annotations

import sqlite3
import time
from pathlib import Path

import numpy as np
import pytest

from rtanalyzer.dsp.spectrum import Spectrum
from rtanalyzer.store import (
    CompactSpectrum,
    Snapshot,
    SnapshotStore,
    StoreError,
    StoreUnusable,
    back_up_unusable,
    compact_spectrum,
)
from rtanalyzer.store.schema import APPLICATION_ID, CURRENT_VERSION
from rtanalyzer.store.snapshot import iso_utc

# ---- builders -------------------------------------------------------------------------------------


def sideband_result(worst=32.4, carrier=46.2, tones=(1000.0,), unwanted_detected=True, carrier_hz=4007.3,
                    bandwidth=1.468, carrier_detected=True):
    points = [
        {"tone_hz": t, "wanted_hz": carrier_hz + t, "unwanted_hz": carrier_hz - t, "wanted_dbfs": -8.3,
         "unwanted_dbfs": -8.3 - worst, "unwanted_detected": unwanted_detected, "sideband_suppression_db": worst}
        for t in tones
    ]
    return {
        "measurement": "sideband", "signal": "channel 1", "sample_rate_hz": 48000.0, "carrier_hz": carrier_hz,
        "carrier_dbfs": -8.3 - carrier, "carrier_detected": carrier_detected, "carrier_suppression_db": carrier,
        "wanted_side": "above", "tuning_offset_hz": 7.3, "points": points,
        "worst_sideband_suppression_db": worst, "worst_is_lower_bound": not unwanted_detected,
        "noise_floor_dbfs": -137.7, "analysis_bandwidth_hz": bandwidth, "clipped": False, "warnings": [],
    }


def twotone_result(imd3=-32.8, imd3_bound=False, pep=-7.9):
    imd = []
    for order, worst in ((3, imd3), (5, -46.8), (7, -55.9), (9, -63.0)):
        bound = imd3_bound and order == 3
        imd.append({
            "order": order, "lower_hz": 3507.3, "lower_dbfs": worst + pep, "lower_dbc": worst + 6.02,
            "lower_db_pep": worst, "lower_detected": not bound, "upper_hz": 7107.3, "upper_dbfs": worst + pep - 0.1,
            "upper_dbc": worst + 5.9, "upper_db_pep": worst - 0.1, "upper_detected": not bound,
            "worst_db_pep": worst, "worst_is_bound": bound,
        })
    return {
        "measurement": "twotone", "signal": "channel 1", "sample_rate_hz": 48000.0, "tone_hz": [4707.3, 5907.3],
        "tone_dbfs": [pep - 6.02, pep - 6.02], "pep_dbfs": pep, "imd": imd, "worst_imd_order": 3,
        "worst_imd_db_pep": imd3, "worst_imd_is_bound": imd3_bound, "noise_floor_dbfs": -137.9,
        "analysis_bandwidth_hz": 1.468, "clipped": False, "warnings": [],
    }


def compact(seed=0, n=4096, is_complex=False):
    rng = np.random.default_rng(seed)
    levels = (-130 + 5 * rng.standard_normal(n)).astype("<f4")
    start = -24000.0 if is_complex else 2.6
    return CompactSpectrum(levels, start, 5.86, 0.732, 1.468, is_complex, 8)


def snapshot(result=None, when=None, tones=(1000.0,), carrier=4000.0, **kw):
    result = sideband_result() if result is None else result
    when = time.time() if when is None else when
    fields = dict(
        measurement=result["measurement"], result=result, created_utc=iso_utc(when), created_epoch=when,
        source="file", device="take.wav", sample_rate_hz=48000.0,
        plan={"tones_hz": list(tones), "carrier_hz": carrier, "wanted": "auto", "view": "real", "channel": 1,
              "resolution_hz": None},
        spectrum=compact(),
    )
    fields.update(kw)
    return Snapshot(**fields)


@pytest.fixture
def store(tmp_path):
    with SnapshotStore.open(tmp_path / "h.sqlite3") as s:
        yield s


# ---- compact spectra ------------------------------------------------------------------------------


def test_compaction_keeps_a_narrow_tone_at_its_level_and_place():
    # A tone of peak 0.1 reads 0.01 in its bin (the spectrum's scale): -20 dBFS (arithmetic).
    nfft, rate = 65536, 48000.0
    p = np.full(nfft // 2 + 1, 1e-14)
    k = 4271
    p[k] = 0.01
    c = compact_spectrum(Spectrum(p, rate, nfft, 1, False))
    assert c.levels_db.size == 4096 and c.pooled == 8 and c.levels_db.dtype == np.dtype("<f4")
    i = int(np.argmax(c.levels_db))
    assert c.levels_db[i] == pytest.approx(-20.0, abs=1e-5)
    # the point's frequency is the centre of its run of 8 bins: within 4 bins of the tone (arithmetic)
    assert abs(c.frequencies_hz[i] - k * rate / nfft) <= 4 * rate / nfft
    assert c.levels_db[(i + 2) % 4096] == pytest.approx(-140.0, abs=1e-4)


def test_compaction_of_an_iq_spectrum_puts_negative_frequencies_first():
    nfft, rate = 8192, 48000.0
    p = np.full(nfft, 1e-12)
    k = nfft - 512  # -512 bins: -3000 Hz (arithmetic: 512 * 48000 / 8192)
    p[k] = 1.0
    c = compact_spectrum(Spectrum(p, rate, nfft, 1, True))
    assert c.is_complex and c.pooled == 2
    assert c.frequencies_hz[0] == pytest.approx(-24000.0 + 0.5 * rate / nfft)
    f = c.frequencies_hz[int(np.argmax(c.levels_db))]
    assert f == pytest.approx(-3000.0, abs=rate / nfft)


def test_short_live_spectrum_is_kept_bin_for_bin():
    nfft = 4096
    p = np.linspace(1e-6, 1.0, nfft // 2 + 1)
    c = compact_spectrum(Spectrum(p, 48000.0, nfft, 1, False))
    assert c.pooled == 1 and c.levels_db.size == nfft // 2
    np.testing.assert_allclose(c.levels_db, 10 * np.log10(p[: nfft // 2]), atol=1e-4)  # float32 rounding


# ---- add, get, list, edit ---------------------------------------------------------------------------


def test_every_field_comes_back_equal(store):
    s = snapshot(
        result=twotone_result(), rig="halyard 20 m", origin="live-end", source="sim", device="simulated bench, 48000 Hz, 1 ch",
        generator={"kind": "twotone", "low_hz": 700.0, "high_hz": 1900.0, "level_dbfs": -6.0, "ratio_db": 0.0},
        setup={"bench": {"phase_trim_deg": 0.3}}, calibration=(), clipped=True,
        levels={"peak_dbfs": [-6.1], "rms_dbfs": [-9.2], "clip": [False], "clipped_samples": [0]},
        xruns={"input_overflows": 1, "output_underflows": 0, "dropped_blocks": 2},
        note="C12 10 nF → 9.1 nF, \"tight\"\nsecond line", tags=("before", "cap swap"),
        spectrum=compact(3, 2048, is_complex=True),
    )
    n = store.add(s)
    back = store.get(n)
    assert back == s.with_changes(id=n)
    assert back.spectrum == s.spectrum and back.spectrum is not s.spectrum


def test_list_filters_and_order(store):
    t0 = 1_700_000_000.0
    ids = [
        store.add(snapshot(when=t0, rig="a", tags=("before",))),
        store.add(snapshot(when=t0 + 60, rig="b", tags=("before", "x"))),
        store.add(snapshot(twotone_result(), when=t0 + 120, rig="a", tags=("after",))),
        store.add(snapshot(when=t0 + 180, rig="a")),
    ]
    assert [s.id for s in store.list()] == ids
    assert [s.id for s in store.list(rig="a")] == [ids[0], ids[2], ids[3]]
    assert [s.id for s in store.list(tags="before")] == ids[:2]
    assert [s.id for s in store.list(tags=["before", "x"])] == [ids[1]]
    assert [s.id for s in store.list(measurement="twotone")] == [ids[2]]
    assert [s.id for s in store.list(since=t0 + 60, until=t0 + 180)] == ids[1:3]
    assert [s.id for s in store.list(limit=2, newest_first=True)] == [ids[3], ids[2]]
    assert store.list()[0].spectrum is None and store.list(with_spectra=True)[0].spectrum is not None
    assert store.count(rig="a") == 3
    assert store.tags() == {"after": 1, "before": 2, "x": 1}
    assert store.rigs() == ["a", "b"]


def test_timeline_summaries_come_from_the_columns(store):
    a = store.add(snapshot(sideband_result(60.1, unwanted_detected=False, carrier_detected=False), tags=("x", "a")))
    b = store.add(snapshot(twotone_result(-61.0, imd3_bound=True), note="n"))
    sa, sb = store.summaries()
    assert (sa.id, sa.tags, sb.id, sb.note) == (a, ("a", "x"), b, "n")
    assert sa.figures["worst_sideband_suppression_db"] == 60.1 and sa.figures["worst_imd_db_pep"] is None
    assert sa.bounds == {"worst_sideband_suppression_db", "carrier_suppression_db"}
    assert sb.figures["imd5_worst_db_pep"] == -46.8 and sb.bounds == {"imd3_worst_db_pep", "worst_imd_db_pep"}
    assert [s.id for s in store.summaries(measurement="twotone", limit=1, newest_first=True)] == [b]


def test_notes_tags_delete(store):
    n = store.add(snapshot(tags=("before",)))
    store.set_note(n, "after re-soldering R7")
    assert store.add_tag(n, "evening 2") is True
    assert store.add_tag(n, "evening 2") is False
    assert store.remove_tag(n, "before") is True
    assert store.remove_tag(n, "before") is False
    s = store.get(n)
    assert s.note == "after re-soldering R7" and s.tags == ("evening 2",)
    store.delete(n)
    with pytest.raises(StoreError, match=f"no snapshot #{n}"):
        store.get(n)
    # tags and spectrum go with it (foreign keys, ON DELETE CASCADE: SQLite documentation)
    assert store._conn.execute("SELECT count(*) FROM tags").fetchone()[0] == 0
    assert store._conn.execute("SELECT count(*) FROM spectra").fetchone()[0] == 0
    # AUTOINCREMENT never gives a deleted id again (SQLite documentation, "Autoincrement")
    assert store.add(snapshot()) == n + 1
    for call in (lambda: store.set_note(999, "x"), lambda: store.add_tag(999, "x"), lambda: store.delete(999)):
        with pytest.raises(StoreError, match="no snapshot #999"):
            call()


@pytest.mark.parametrize("bad", ["", " lead", "a\nb", "x" * 81])
def test_bad_tag_and_rig_names_are_one_line_errors(store, bad):
    n = store.add(snapshot())
    with pytest.raises(StoreError, match="tag name"):
        store.add_tag(n, bad)
    with pytest.raises(StoreError, match="rig name"):
        snapshot(rig=bad)


def test_select_by_id_and_tag(store):
    a = store.add(snapshot(tags=("before",)))
    b = store.add(snapshot(tags=("before",)))
    assert [s.id for s in store.select(f"#{a}")] == [a]
    assert [s.id for s in store.select("tag:before")] == [a, b]
    assert store.select("tag:before")[0].spectrum is not None
    with pytest.raises(StoreError, match="no snapshot has the tag 'nope'.*before"):
        store.select("tag:nope")
    with pytest.raises(StoreError, match="not a snapshot"):
        store.select("twelve")


# ---- the file -------------------------------------------------------------------------------------------


def test_wal_full_sync_and_marks(tmp_path):
    path = tmp_path / "h.sqlite3"
    with SnapshotStore.open(path) as s:
        # WAL is persistent in the file; synchronous is per connection, 2 = FULL (SQLite documentation,
        # "PRAGMA journal_mode", "PRAGMA synchronous")
        assert s._conn.execute("PRAGMA synchronous").fetchone()[0] == 2
        assert s.version == CURRENT_VERSION
    conn = sqlite3.connect(path)
    assert conn.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
    assert conn.execute("PRAGMA application_id").fetchone()[0] == APPLICATION_ID
    conn.close()


def test_default_path_follows_the_environment(tmp_path, monkeypatch):
    from rtanalyzer.store import default_store_path

    monkeypatch.setenv("RTANALYZER_STORE", str(tmp_path / "elsewhere.db"))
    assert default_store_path() == tmp_path / "elsewhere.db"
    monkeypatch.delenv("RTANALYZER_STORE")
    assert default_store_path().name == "history.sqlite3" and "rtanalyzer" in str(default_store_path())


def test_missing_store_is_not_made_when_only_reading(tmp_path):
    with pytest.raises(StoreError, match="no history store"):
        SnapshotStore.open(tmp_path / "none.sqlite3", create=False)
    assert not (tmp_path / "none.sqlite3").exists()


# The first layout, written here by hand as version 1 files were (frozen: it must not follow the code).
V1_LAYOUT = [
    """CREATE TABLE snapshots (id INTEGER PRIMARY KEY AUTOINCREMENT, uid TEXT NOT NULL UNIQUE,
       created_utc TEXT NOT NULL, created_epoch REAL NOT NULL, rig TEXT NOT NULL, origin TEXT NOT NULL,
       measurement TEXT NOT NULL, source TEXT NOT NULL, device TEXT NOT NULL, sample_rate_hz REAL NOT NULL,
       plan_json TEXT NOT NULL, generator_json TEXT, setup_json TEXT NOT NULL, result_json TEXT NOT NULL,
       clipped INTEGER NOT NULL, levels_json TEXT, xruns_json TEXT NOT NULL, note TEXT NOT NULL DEFAULT '',
       worst_sideband_suppression_db REAL, carrier_suppression_db REAL, worst_imd_db_pep REAL)""",
    """CREATE TABLE tags (snapshot_id INTEGER NOT NULL REFERENCES snapshots(id) ON DELETE CASCADE,
       tag TEXT NOT NULL, PRIMARY KEY (snapshot_id, tag)) WITHOUT ROWID""",
    """CREATE TABLE spectra (snapshot_id INTEGER PRIMARY KEY REFERENCES snapshots(id) ON DELETE CASCADE,
       start_hz REAL NOT NULL, step_hz REAL NOT NULL, bin_hz REAL NOT NULL, enbw_hz REAL NOT NULL,
       is_complex INTEGER NOT NULL, pooled INTEGER NOT NULL, levels_db BLOB NOT NULL)""",
    "CREATE INDEX tags_by_tag ON tags(tag, snapshot_id)",
    "CREATE INDEX snapshots_by_time ON snapshots(created_epoch, id)",
    "CREATE INDEX snapshots_by_rig ON snapshots(rig, created_epoch)",
    "CREATE INDEX snapshots_by_measurement ON snapshots(measurement, created_epoch)",
    f"PRAGMA application_id = {0x72744168}",
    "PRAGMA user_version = 1",
]


def test_version_1_file_is_brought_up_to_date_keeping_its_snapshots(tmp_path):
    import json

    path = tmp_path / "old.sqlite3"
    conn = sqlite3.connect(path)
    for statement in V1_LAYOUT:
        conn.execute(statement)
    result = twotone_result(imd3=-31.5)
    conn.execute(
        "INSERT INTO snapshots (uid, created_utc, created_epoch, rig, origin, measurement, source, device, "
        "sample_rate_hz, plan_json, generator_json, setup_json, result_json, clipped, levels_json, xruns_json, note, "
        "worst_imd_db_pep) VALUES ('u1', '2024-05-01T18:00:00.000Z', 1714586400.0, 'default', 'analyze', 'twotone', "
        "'file', 'tt.wav', 48000.0, ?, NULL, '{}', ?, 0, NULL, '{}', 'old note', -31.5)",
        (json.dumps({"tones_hz": [700.0, 1900.0]}), json.dumps(result)),
    )
    conn.execute("INSERT INTO tags VALUES (1, 'before')")
    conn.commit()
    conn.close()

    with SnapshotStore.open(path) as s:
        assert s.version == CURRENT_VERSION == 2
        old = s.get(1)
        assert old.result == result and old.note == "old note" and old.tags == ("before",)
        assert old.calibration == () and old.spectrum is None
        # the new per-order columns were filled from the stored JSON
        row = s._conn.execute("SELECT imd3_worst_db_pep, imd9_worst_db_pep, bound_flags FROM snapshots WHERE id = 1").fetchone()
        assert row == (-31.5, -63.0, 0)
        assert s.summaries()[0].figures["imd3_worst_db_pep"] == -31.5
        assert s.add(snapshot()) == 2
    with SnapshotStore.open(path) as s:  # opening again changes nothing
        assert s.version == 2 and s.count() == 2


def test_a_newer_layout_is_refused_and_left_alone(tmp_path):
    from conftest import file_digest

    path = tmp_path / "h.sqlite3"
    SnapshotStore.open(path).close()
    conn = sqlite3.connect(path)
    conn.execute("PRAGMA user_version = 99")
    conn.close()
    before = file_digest(path)
    with pytest.raises(StoreError, match="newer rtanalyzer .*version 99"):
        SnapshotStore.open(path)
    assert file_digest(path) == before


def _random_bytes(path: Path) -> None:
    path.write_bytes(np.random.default_rng(5).integers(0, 256, 8192, dtype=np.uint8).tobytes())


def _text(path: Path) -> None:
    path.write_text("rig notes\nC12 = 10 nF\n", encoding="utf-8")


def _foreign(path: Path) -> None:
    conn = sqlite3.connect(path)
    conn.execute("CREATE TABLE contacts (call TEXT, band TEXT)")
    conn.execute("INSERT INTO contacts VALUES ('XX0XX', '20m')")
    conn.commit()
    conn.close()


def _damaged(path: Path) -> None:
    _foreign(path)
    data = bytearray(path.read_bytes())
    data[100:] = np.random.default_rng(1).integers(0, 256, len(data) - 100, dtype=np.uint8).tobytes()
    path.write_bytes(bytes(data))


@pytest.mark.parametrize("make,why", [
    (_random_bytes, "not an SQLite database"),
    (_text, "text file"),
    (_foreign, "another program"),
    (_damaged, ""),
])
def test_unusable_files_are_refused_untouched_and_can_be_moved_aside(tmp_path, make, why):
    from conftest import file_digest

    path = tmp_path / "h.sqlite3"
    make(path)
    before = file_digest(path)
    with pytest.raises(StoreUnusable) as err:
        SnapshotStore.open(path)
    assert why in str(err.value) and "\n" not in str(err.value)
    assert file_digest(path) == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["h.sqlite3"]  # no -wal/-shm left beside it
    moved = back_up_unusable(path)
    assert moved.name.startswith("h.sqlite3.bak-") and file_digest(moved) == before and not path.exists()
    with SnapshotStore.open(path) as s:
        assert s.count() == 0
    assert back_up_unusable(path) != moved  # a second backup never overwrites the first
