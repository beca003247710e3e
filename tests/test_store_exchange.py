"""Export, import and the HTML report: nothing lost on the way out and back; a report needing nothing else."""

from __future__ import annotations

import json
import re
import time

import pytest

from rtanalyzer.cli.cautions import CAUTIONS
from rtanalyzer.store import SnapshotStore, StoreError, compare
from rtanalyzer.store.exchange import export_snapshots, read_export
from rtanalyzer.store.report import render_report
from test_store import compact, sideband_result, snapshot, twotone_result


def _varied(tmp_path):
    """A store holding the awkward cases: I/Q spectrum, none, odd text, live meters, deleted ids."""
    path = tmp_path / "source.sqlite3"
    with SnapshotStore.open(path) as store:
        store.add(snapshot(note="first", tags=("before",)))
        gone = store.add(snapshot())
        store.add(snapshot(twotone_result(imd3_bound=True), rig="bench 2", origin="live-best", source="sim",
                           device="simulated bench, 48000 Hz, 2 ch", spectrum=compact(2, 4096, is_complex=True),
                           generator={"kind": "twotone", "low_hz": 700.0, "high_hz": 1900.0, "level_dbfs": -6.0},
                           levels={"peak_dbfs": [-6.0, None], "rms_dbfs": [-9.0, -9.1], "clip": [False, True],
                                   "clipped_samples": [0, 3]},
                           xruns={"input_overflows": 2, "output_underflows": 0, "dropped_blocks": 1},
                           note='quotes " and, commas; newline\nand unicode µs ±0.1 dB <b>', tags=("after", "a,b")))
        store.add(snapshot(sideband_result(60.1, unwanted_detected=False), spectrum=None, clipped=True,
                           created_epoch=time.time() + 10.123456789))
        store.delete(gone)
        return path, store.list(with_spectra=True)


@pytest.mark.parametrize("fmt", ["json", "csv"])
def test_export_all_then_import_into_an_empty_store_gives_every_field_back(tmp_path, fmt):
    _, original = _varied(tmp_path)
    out = tmp_path / f"all.{fmt}"
    assert export_snapshots(original, out, fmt) == 3
    with SnapshotStore.open(tmp_path / "empty.sqlite3") as fresh:
        ids = fresh.add_many(read_export(out), keep_ids=True)
        assert ids == [s.id for s in original]  # ids kept where free (here: all)
        back = fresh.list(with_spectra=True)
        assert back == original  # dataclass equality: every field, spectra bit for bit (np.array_equal)
        assert [s.spectrum is None for s in back] == [False, False, True]
        # importing the same file again adds nothing (the uid of each snapshot is already there)
        assert fresh.add_many(read_export(out), keep_ids=True) == [None, None, None]
        assert fresh.count() == 3


def test_import_into_a_busy_store_gets_new_ids_where_taken(tmp_path):
    _, original = _varied(tmp_path)
    out = tmp_path / "all.json"
    export_snapshots(original, out, "json")
    with SnapshotStore.open(tmp_path / "other.sqlite3") as other:
        first = other.add(snapshot(note="already here"))
        ids = other.add_many(read_export(out), keep_ids=True)
        assert first == 1 == original[0].id and ids[0] != 1 and ids[1:] == [s.id for s in original[1:]]
        assert other.get(ids[0]).note == "first"


def test_csv_is_one_row_per_snapshot_with_readable_columns_first(tmp_path):
    import csv

    _, original = _varied(tmp_path)
    out = tmp_path / "all.csv"
    export_snapshots(original, out, "csv")
    rows = list(csv.DictReader(out.open(newline="", encoding="utf-8")))
    assert len(rows) == 3
    assert list(rows[0])[:5] == ["id", "created_utc", "created_epoch", "rig", "measurement"]
    assert rows[0]["worst_sideband_suppression_db"] == "32.4" and rows[1]["worst_imd_db_pep"] == "-32.8"
    assert json.loads(rows[1]["result_json"]) == original[1].result


@pytest.mark.parametrize("content,why", [
    ('{"some": "json"}', "not an rtanalyzer history export"),
    ("a,b\n1,2\n", "not an rtanalyzer history export"),
    ('{"format": "rtanalyzer-history", "version": 7, "snapshots": []}', "version 7"),
    ('{"format": "rtanalyzer-history", "version": 1, "snapshots": [{"id": 1}]}', "KeyError"),
])
def test_bad_import_files_are_one_line_errors(tmp_path, content, why):
    bad = tmp_path / "bad.json"
    bad.write_text(content, encoding="utf-8")
    with pytest.raises(StoreError, match=why) as err:
        read_export(bad)
    assert "\n" not in str(err.value)
    with pytest.raises(StoreError, match="no such file"):
        read_export(tmp_path / "missing.json")


def test_report_is_self_contained_with_figures_plots_notes_setup_and_cautions(tmp_path):
    _, snaps = _varied(tmp_path)
    sb = [s for s in snaps if s.measurement == "sideband"]
    c = compare(sb[:1], sb[1:], f"#{sb[0].id}", f"#{sb[1].id}")
    html = render_report(snaps, CAUTIONS, (c, sb[:1], sb[1:]), "all", "/tmp/h.sqlite3")
    # nothing to fetch: no scripts, no links, no external resources (common practice, no source)
    for pattern in (r"<script", r"\bsrc=", r"\bhref=", r"url\(", r"@import", r"<link", r"<img"):
        assert not re.search(pattern, html, re.I), pattern
    assert html.count("<svg") == 1 + 1 + 2  # the overlay, one timeline (sideband), two snapshot spectra
    for line in CAUTIONS.splitlines()[1:]:
        if line.startswith("- "):
            assert line[2:40].replace("'", "&#x27;") in html
    assert "quotes &quot; and, commas; newline\nand unicode µs ±0.1 dB &lt;b&gt;" in html  # escaped, kept
    assert "none (no calibration profiles applied)" in html
    assert "simulated bench, 48000 Hz, 2 ch" in html and "kind twotone" in html
    assert "at least 60.1 dB" in html and "CLIPPED" in html
    assert "Before / after" in html and "better" in html
    assert "input overflows 2" in html
