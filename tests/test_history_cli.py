"""`analyze --save`, `live --save/--save-best` and `rtanalyzer history ...` on the command line.

Captures come from the simulated bench (`rtanalyzer simulate`), 1 s long so each analysis is quick.
Errors are one line on stderr and exit status 2, as for every command.
"""

from __future__ import annotations

import io
import json
import sys
from types import SimpleNamespace

import pytest

from conftest import file_digest
from rtanalyzer.cli.main import main
from rtanalyzer.store import SnapshotStore, StoreUnusable


@pytest.fixture(autouse=True)
def _quiet(cautions_already_shown):
    """Every test here runs as a user who has already seen the first-run safety notice."""


@pytest.fixture
def store_path(tmp_path, monkeypatch):
    path = tmp_path / "history.sqlite3"
    monkeypatch.setenv("RTANALYZER_STORE", str(path))
    return path


@pytest.fixture(scope="module")
def captures(tmp_path_factory):
    """Before (phase trim 1.5°) and after (0.2°) captures of the demo bench, and a two-tone one."""
    folder = tmp_path_factory.mktemp("captures")
    out = {}
    for name, extra in (("before", ["--phase-trim-deg", "1.5"]), ("after", ["--phase-trim-deg", "0.2"]),
                        ("tt", ["--tones", "700", "1900"])):
        path = folder / f"{name}.wav"
        assert main(["simulate", "--seconds", "1", "--out", str(path), *extra]) == 0
        out[name] = path
    return out


def run(argv, capsys, stdin=None, monkeypatch=None):
    if stdin is not None:
        monkeypatch.setattr(sys, "stdin", stdin)
    code = main([str(a) for a in argv])
    out = capsys.readouterr()
    return code, out.out, out.err


def one_error_line(code, err, needle):
    assert code == 2, err
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("rtanalyzer: error:") and needle in lines[0], err


def save(captures, capsys, name="before", *extra):
    tones = ["--tones", "700", "1900"] if name == "tt" else ["--tone", "1000"]
    kind = "twotone" if name == "tt" else "sideband"
    code, out, err = run(["analyze", kind, captures[name], *tones, "--carrier", "4000", "--save", *extra], capsys)
    assert code == 0, err
    return out


def test_analyze_save_keeps_figures_plan_file_and_spectrum(captures, store_path, capsys):
    out = save(captures, capsys, "before", "--tag", "before", "--note", "C12 10 nF", "--rig", "halyard")
    assert out.strip().splitlines()[-1] == "saved snapshot #1"
    code, js, err = run(["analyze", "sideband", captures["before"], "--tone", "1000", "--carrier", "4000", "--json"], capsys)
    with SnapshotStore.open(store_path) as store:
        s = store.get(1)
    assert s.result == json.loads(js)  # the measurement JSON, as is
    assert (s.rig, s.tags, s.note, s.origin, s.source) == ("halyard", ("before",), "C12 10 nF", "analyze", "file")
    assert s.plan == {"tones_hz": [1000.0], "carrier_hz": 4000.0, "wanted": "auto", "view": "real", "channel": 1,
                      "resolution_hz": None}
    assert s.setup["format"] == "16-bit PCM WAV" and s.sample_rate_hz == 48000.0 and s.calibration == ()
    # the stored spectrum shows the unwanted sideband at the level the figures give (max-pooled bins)
    sp = s.spectrum
    k = int(round((s.result["points"][0]["unwanted_hz"] - sp.start_hz) / sp.step_hz))
    assert float(sp.levels_db[k - 1:k + 2].max()) == pytest.approx(s.result["points"][0]["unwanted_dbfs"], abs=0.9)


def test_json_output_stays_one_object_when_saving(captures, store_path, capsys):
    code, out, err = run(["analyze", "sideband", captures["after"], "--tone", "1000", "--carrier", "4000", "--json", "--save", "--store",
                          store_path], capsys)
    assert code == 0 and json.loads(out)["measurement"] == "sideband"
    assert err.strip() == "saved snapshot #1"


def test_note_without_save_is_refused(captures, store_path, capsys):
    code, out, err = run(["analyze", "sideband", captures["after"], "--tone", "1000", "--tag", "x"], capsys)
    one_error_line(code, err, "--tag goes with --save")
    assert not store_path.exists()


def test_list_show_note_tag_and_compare(captures, store_path, capsys):
    save(captures, capsys, "before", "--tag", "before", "--note", "as built, C12 = 10 nF and a long tail of words")
    save(captures, capsys, "after", "--tag", "after")
    save(captures, capsys, "tt", "--rig", "bench 2")
    code, out, err = run(["history", "list"], capsys)
    assert code == 0, err
    lines = out.splitlines()
    assert lines[0].split()[:6] == ["id", "time", "rig", "measurement", "from", "figures"]
    assert "#1" in lines[1] and " dB " in lines[1] and "dBc" in lines[1] and "before" in lines[1]
    assert "as built, C12 = 10 nF and a lon…" in lines[1]
    assert "IMD3" in lines[3] and "dB PEP" in lines[3] and "bench 2" in lines[3]
    assert lines[-1].startswith("3 snapshots")

    code, out, _ = run(["history", "list", "--rig", "bench 2", "--json"], capsys)
    rows = json.loads(out)
    assert [r["id"] for r in rows] == [3] and rows[0]["imd3_worst_db_pep"] < -20
    assert json.loads(run(["history", "list", "--since", "2999-01-01", "--json"], capsys)[1]) == []
    assert [r["id"] for r in json.loads(run(["history", "list", "--since", "1h", "--tag", "after", "--json"], capsys)[1])] == [2]

    assert run(["history", "note", "2", "C12 swapped for 9.1 nF"], capsys)[0] == 0
    assert run(["history", "tag", "#2", "cap swap"], capsys)[1].strip() == "tagged #2 'cap swap'"
    code, out, _ = run(["history", "show", "2"], capsys)
    assert "C12 swapped for 9.1 nF" in out and "after, cap swap" in out and "opposite-sideband suppression" in out
    assert "calibration in force: none" in out and "spectrum" in out
    shown = json.loads(run(["history", "show", "2", "--json"], capsys)[1])
    assert shown["tags"] == ["after", "cap swap"] and shown["spectrum"]["points"] <= 4096
    assert run(["history", "tag", "2", "cap swap", "--remove"], capsys)[1].startswith("removed tag")

    code, out, err = run(["history", "compare", "tag:before", "tag:after"], capsys)
    assert code == 0, err
    worst = next(line for line in out.splitlines() if line.startswith("worst opposite-sideband suppression"))
    assert "better by" in worst  # 1.5° -> 0.2° of phase error (simulated bench)
    js = json.loads(run(["history", "compare", "1", "2", "--json"], capsys)[1])
    assert {f["key"] for f in js["figures"]} >= {"worst_sideband_suppression_db", "carrier_suppression_db",
                                                 "noise_floor_dbfs", "sideband_suppression_db@1000"}
    code, out, err = run(["history", "compare", "1", "3"], capsys)
    one_error_line(code, err, "#1 is a sideband measurement and #3 a twotone one")
    one_error_line(*run(["history", "show", "99"], capsys)[::2], "no snapshot #99")
    one_error_line(*run(["history", "compare", "tag:nope", "1"], capsys)[::2], "no snapshot has the tag 'nope'")
    one_error_line(*run(["history", "list", "--since", "yesterday-ish"], capsys)[::2], "--since 'yesterday-ish' is not a date")


def test_delete_asks_and_keeps_the_snapshot_without_an_answer(captures, store_path, capsys, monkeypatch):
    save(captures, capsys, "before", "--tag", "before")
    code, out, err = run(["history", "delete", "1"], capsys, io.StringIO(""), monkeypatch)
    assert code == 1 and "delete snapshot #1 (" in err and "[y/N]" in err and "kept" in err
    code, out, err = run(["history", "delete", "1"], capsys, io.StringIO("n\n"), monkeypatch)
    assert code == 0 and "kept snapshot #1" in out
    code, out, err = run(["history", "delete", "1"], capsys, io.StringIO("y\n"), monkeypatch)
    assert code == 0 and "deleted snapshot #1" in out
    save(captures, capsys, "after")
    assert run(["history", "delete", "2", "--yes"], capsys)[0] == 0
    assert json.loads(run(["history", "list", "--json"], capsys)[1]) == []


def test_export_import_and_report_from_the_command_line(captures, store_path, tmp_path, capsys):
    save(captures, capsys, "before", "--tag", "before", "--note", "before <swap>")
    save(captures, capsys, "after", "--tag", "after")
    out_json, out_csv = tmp_path / "all.json", tmp_path / "all.csv"
    assert run(["history", "export", "--out", out_json], capsys)[1].startswith("exported 2 snapshots")
    assert run(["history", "export", "--tag", "after", "--format", "csv", "--out", out_csv], capsys)[0] == 0
    other = tmp_path / "other.sqlite3"
    code, out, err = run(["history", "import", out_json, "--store", other], capsys)
    assert code == 0 and out.strip() == f"imported 2 snapshots from {out_json} (#1..#2)"
    assert "skipped 2 already in the store" in run(["history", "import", out_json, "--store", other], capsys)[1]
    with SnapshotStore.open(store_path) as a, SnapshotStore.open(other) as b:
        assert a.list(with_spectra=True) == b.list(with_spectra=True)

    report = tmp_path / "report.html"
    code, out, err = run(["history", "report", "--compare", "tag:before", "tag:after", "--out", report], capsys)
    assert code == 0, err
    html = report.read_text(encoding="utf-8")
    assert "before &lt;swap&gt;" in html and "<svg" in html and "Safety cautions" in html and "<script" not in html
    assert run(["history", "report", "--out", tmp_path / "all.html"], capsys)[0] == 0
    one_error_line(*run(["history", "report", "--rig", "nobody", "--out", tmp_path / "x.html"], capsys)[::2],
                   "nothing to report")


@pytest.mark.parametrize("content", [b"\x00\x01garbage" * 300, b"just some text\n"], ids=["bytes", "text"])
def test_a_bad_store_file_is_refused_kept_and_replaced_only_when_asked(captures, tmp_path, capsys, content, monkeypatch):
    bad = tmp_path / "bad.sqlite3"
    bad.write_bytes(content)
    digest = file_digest(bad)
    argv = ["analyze", "sideband", captures["before"], "--tone", "1000", "--carrier", "4000", "--save", "--store", bad]
    code, out, err = run(argv, capsys)
    one_error_line(code, err, "is not a usable rtanalyzer history store")
    assert "--reset-store" in err and file_digest(bad) == digest
    for action in (["history", "list"], ["history", "show", "1"]):
        code, out, err = run([*action, "--store", bad], capsys)
        one_error_line(code, err, "not a usable rtanalyzer history store")
    code, out, err = run([*argv, "--reset-store"], capsys)
    assert code == 0 and "saved snapshot #1" in out and "moved the unusable store" in err
    backups = list(tmp_path.glob("bad.sqlite3.bak-*"))
    assert len(backups) == 1 and file_digest(backups[0]) == digest


class _Terminal(io.StringIO):
    def isatty(self):
        return True


@pytest.mark.parametrize("answer,moved", [("y\n", True), ("\n", False)])
def test_at_a_terminal_the_move_aside_is_offered(tmp_path, answer, moved):
    from rtanalyzer.cli.history_options import open_store

    bad = tmp_path / "h.sqlite3"
    bad.write_text("not a database\n")
    err = io.StringIO()
    args = SimpleNamespace(store=str(bad), reset_store=False)
    if moved:
        open_store(args, stdin=_Terminal(answer), stderr=err).close()
        assert "start a new store? [y/N]" in err.getvalue() and list(tmp_path.glob("h.sqlite3.bak-*"))
    else:
        with pytest.raises(StoreUnusable, match="Nothing was changed"):
            open_store(args, stdin=_Terminal(answer), stderr=err)
        assert bad.read_text() == "not a database\n"


def test_live_save_and_save_best(store_path, capsys):
    code, out, err = run(["live", "--headless", "--source", "sim", "--seconds", "1.6", "--jsonl", "--save",
                          "--save-best", "--tag", "trim", "--note", "phase pot"], capsys)
    assert code == 0, err
    readouts = [json.loads(line) for line in out.splitlines()]
    assert readouts and "saved snapshot #" in err and "best-so-far snapshot" in err
    with SnapshotStore.open(store_path) as store:
        snaps = store.list(with_spectra=True)
    best = [s for s in snaps if s.origin == "live-best"]
    end = [s for s in snaps if s.origin == "live-end"]
    assert len(end) == 1 and 1 <= len(best) <= 3  # 1.6 s at most one a second, plus the one held at the end
    figures = [s.result["worst_sideband_suppression_db"] for s in best]
    assert figures == sorted(figures) and len(set(figures)) == len(figures)  # each a new best
    last = end[0]
    assert last.result == {k: v for k, v in readouts[-1].items() if k in last.result}
    assert set(last.xruns) == {"input_overflows", "output_underflows", "dropped_blocks"} and last.levels["peak_dbfs"]
    assert last.source == "sim" and last.generator["kind"] == "tone" and "bench" in last.setup
    assert last.tags == ("trim",) and last.note == "phase pot" and last.spectrum.pooled == 1


def test_save_best_is_rate_limited_and_keeps_the_last_best(monkeypatch):
    from rtanalyzer.cli import history_options

    clock = [100.0]
    monkeypatch.setattr(history_options.time, "monotonic", lambda: clock[0])
    saved = []

    class Store:
        def add(self, s):
            saved.append((clock[0], s.result["worst_sideband_suppression_db"]))
            return len(saved)

        def close(self):
            pass

    saver = history_options.LiveSaver.__new__(history_options.LiveSaver)
    saver.args = SimpleNamespace(save=False, save_best=True)
    saver.store, saver.key, saver.larger_is_better = Store(), "worst_sideband_suppression_db", True
    saver.measurement = "sideband"
    saver.last, saver.best_value, saver.pending, saver.last_saved_at, saver.saved_best = None, None, None, -1e9, []
    saver.saved_value, saver.min_gain_db = None, 0.05
    saver._snapshot = lambda readout, origin: SimpleNamespace(result=readout.result)
    # readouts every 0.1 s: new bests at 0.0, 0.3, 0.5, 0.6, 1.5; others no better
    values = [30, 29, 29, 31, 30, 32, 33, 30, 30, 30, 30, 30, 30, 30, 30, 34, 30, 30, 30, 30, 30, 34.04]
    for i, v in enumerate(values):
        clock[0] = 100.0 + 0.1 * i
        saver.readout(SimpleNamespace(result={"worst_sideband_suppression_db": v}))
    clock[0] = 102.15
    saver.finish(io.StringIO())
    # 30 at once; 31..33 held until a second has passed (saved: 33); 34 held until 2.0 s; 34.04 is within
    # the 0.05 dB steady band of the saved 34 (readout noise): not saved
    assert saved == [(100.0, 30), (pytest.approx(101.0), 33), (pytest.approx(102.0), 34)]
    # a best reached just before the run ends is saved at the end
    clock[0] = 103.0
    saver.readout(SimpleNamespace(result={"worst_sideband_suppression_db": 35}))
    clock[0] = 103.2
    saver.readout(SimpleNamespace(result={"worst_sideband_suppression_db": 36}))
    saver.finish(io.StringIO())
    assert saved[-2:] == [(103.0, 35), (103.2, 36)]
