"""`rtanalyzer live`: the live analyzer on the command line (simulated bench or a file).

`--jsonl` gives one JSON object a readout with the same figure keys as `analyze ... --json`;
bad input gives exit code 2 and one line on stderr ("rtanalyzer: error: ..."), no traceback;
Ctrl-C ends a run cleanly with exit code 0. These runs last about a second of wall-clock time
each (the sources play at real-time pace); nothing here asserts on speed.
"""

from __future__ import annotations

import json
import os
import selectors
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from conftest import run_cli as run
from rtanalyzer.cli.main import main

ROOT = Path(__file__).resolve().parents[1]
# `analyze sideband --json` keys (README / cli/analyze.py) that a live readout must carry too
SIDEBAND_KEYS = {
    "sample_rate_hz", "carrier_hz", "carrier_dbfs", "carrier_detected", "carrier_suppression_db",
    "points", "worst_sideband_suppression_db", "noise_floor_dbfs", "analysis_bandwidth_hz",
    "clipped", "warnings",
}


@pytest.fixture(autouse=True)
def _quiet(cautions_already_shown):
    """Every test here runs as a user who has already seen the first-run safety notice."""


def jsonl(out: str) -> list[dict]:
    lines = out.splitlines()
    assert lines, "no readouts"
    return [json.loads(line) for line in lines]


def assert_one_error_line(code, out, err, needle):
    assert code == 2, (code, err)
    assert "Traceback" not in err
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("rtanalyzer: error:"), err
    assert needle in lines[0], err
    assert out == ""


@pytest.fixture(scope="module")
def sim_wav(tmp_path_factory):
    """A 1 s mono capture of the default bench (tone 1000 Hz, carrier at 4000 Hz) and its truth."""
    path = tmp_path_factory.mktemp("live") / "bench.wav"
    assert main(["simulate", "--out", str(path), "--seconds", "1"]) == 0
    return path


# ---- good input --------------------------------------------------------------------------


def test_jsonl_sideband_readouts(capsys, sim_wav):
    code, out, err = run(["live", "--headless", "--source", "sim", "--seconds", 1, "--jsonl"], capsys)
    assert code == 0, err
    rows = jsonl(out)
    for row in rows:
        assert {"t", "measurement", "levels", "xruns"} <= set(row)
        assert row["measurement"] == "sideband"
        assert set(row["xruns"]) == {"input_overflows", "output_underflows", "dropped_blocks"}
    ts = [row["t"] for row in rows]
    assert all(b > a for a, b in zip(ts, ts[1:]))
    # the first readouts may wait for a full window of audio; the rest carry figures
    measured = [row for row in rows if row.get("error") is None]
    assert len(measured) >= 5 and rows[-1].get("error") is None
    assert all(row.get("error") in (None, "filling the analysis window") for row in rows)
    # the same keys as `analyze sideband --json` on a capture of the same bench
    code, out, _ = run(["analyze", "sideband", sim_wav, "--tone", 1000, "--carrier", 4000, "--json"], capsys)
    assert code == 0
    offline = json.loads(out)
    assert SIDEBAND_KEYS <= set(offline)
    for row in measured:
        assert set(offline) <= set(row), set(offline) - set(row)
    truth = json.loads(sim_wav.with_suffix(".json").read_text())
    last = measured[-1]
    # simulated-bench truth; 0.3 dB for the ~85 ms live window (common practice, no source)
    assert last["worst_sideband_suppression_db"] == pytest.approx(truth["worst_sideband_suppression_db"], abs=0.3)


def test_jsonl_twotone_readouts(capsys):
    code, out, err = run(["live", "--headless", "--source", "sim", "--tones", 700, 1900, "--seconds", 1,
                          "--jsonl"], capsys)
    assert code == 0, err
    rows = jsonl(out)
    assert all(row["measurement"] == "twotone" for row in rows)
    measured = [row for row in rows if row.get("error") is None]
    assert measured
    for row in measured:
        assert [o["order"] for o in row["imd"]] == [3, 5, 7, 9]
        assert row["tone_hz"][0] < row["tone_hz"][1]
        assert row["best"]["figure"] == "worst_imd_db_pep"


def test_file_source_plays_the_file_once_and_ends(capsys, sim_wav):
    # --seconds 5 is only a guard: the run must end by itself when the 1 s file is played.
    code, out, err = run(["live", "--headless", "--source", "file", "--file", sim_wav, "--tone", 1000,
                          "--carrier", 4000, "--seconds", 5, "--jsonl"], capsys)
    assert code == 0, err
    rows = jsonl(out)
    measured = [row for row in rows if row.get("error") is None]
    assert measured
    assert {row["source_state"] for row in rows} <= {"running", "finished"}
    truth = json.loads(sim_wav.with_suffix(".json").read_text())
    for row in measured:
        assert row["worst_sideband_suppression_db"] == pytest.approx(truth["worst_sideband_suppression_db"], abs=0.3)


def test_terminal_display_is_readable(capsys):
    # Not a terminal: one plain line a wall-clock second. 2.1 s always spans two second
    # boundaries, the later one at least 1 s in, when figures are there (arithmetic).
    code, out, err = run(["live", "--headless", "--source", "sim", "--seconds", 2.1], capsys)
    assert code == 0, err
    lines = out.splitlines()
    assert len(lines) >= 2
    assert not out.lstrip().startswith("{")
    assert any("opposite sideband" in line and "dB" in line for line in lines), out
    assert "\x1b[" not in out  # no cursor movement when not a terminal


def test_terminal_display_on_a_terminal_redraws_in_place():
    import io

    from rtanalyzer.cli.live_display import TerminalDisplay
    from rtanalyzer.generator.signals import Tone
    from rtanalyzer.live.engine import LiveEngine
    from rtanalyzer.measurements.sideband import SidebandMeasurement
    from rtanalyzer.sources.bench.knobs import BenchKnobs
    from rtanalyzer.sources.bench_source import BenchSource

    class Tty(io.StringIO):
        def isatty(self):
            return True

    source = BenchSource(BenchKnobs(), Tone(1000.0, -6.0), 48000, 1024)
    engine = LiveEngine(source, SidebandMeasurement(), {"tone": [1000.0], "carrier": 4000.0})
    for _ in range(6):
        source.ring.write(source.render_block(1024))
    stream = Tty()
    display = TerminalDisplay(stream, source.describe(), "sideband")
    display.show(engine.step())
    first = stream.getvalue()
    assert "opposite sideband" in first and " dB" in first and "dBc" in first and "xruns" in first
    display.show(engine.step())
    assert "\x1b[" in stream.getvalue()[len(first):]  # moved back up to redraw


# ---- bad input ---------------------------------------------------------------------------


@pytest.mark.parametrize(
    "extra, needle",
    [
        (["--source", "file", "--tone", "1000"], "--file"),
        (["--source", "file", "--file", "{missing}", "--tone", "1000"], "missing.wav"),
        (["--source", "file", "--file", "{wav}"], "--tone"),  # a file says nothing of its tones
        (["--source", "sim", "--generate", "tone", "--measure", "twotone"], "two tones"),
        (["--source", "sim", "--update-hz", "1000"], "1000"),
        (["--source", "sim", "--update-hz", "0"], "--update-hz"),
        (["--source", "file", "--file", "{wav}", "--tone", "1000", "--iq"], "--iq"),
        (["--source", "file", "--file", "{wav}", "--tone", "1000", "--channel", "2"], "channel 2"),
        (["--source", "sim", "--rate", "1000"], "1000"),
        (["--source", "sim", "--tones", "700"], "--tones"),
    ],
    ids=["file-without-file", "missing-file", "file-without-tone", "twotone-of-one-tone", "update-hz-1000",
         "update-hz-0", "iq-of-mono-file", "channel-2-of-mono", "rate-1000", "tones-one-value"],
)
def test_bad_input_is_exit_2_and_one_line(capsys, tmp_path, sim_wav, extra, needle):
    argv = ["live", "--headless", "--seconds", "0.5", "--jsonl",
            *[a.format(missing=tmp_path / "missing.wav", wav=sim_wav) for a in extra]]
    code, out, err = run(argv, capsys)
    assert_one_error_line(code, out, err, needle)


@pytest.mark.parametrize(
    "extra, needle",
    [(["--average", "0"], "--average"), (["--resolution", "0"], "--resolution"),
     (["--resolution", "-5"], "--resolution"), (["--block", "0"], "--block")],
    ids=["average-0", "resolution-0", "resolution-negative", "block-0"],
)
def test_bad_numbers_are_exit_2_and_one_line(capsys, extra, needle):
    # Out-of-range numbers are the user's mistake, not an internal error (exit 3) nor silently
    # replaced (a negative resolution became the 1024-point window) nor a dead source thread
    # (--block 0 killed the bench's thread with ZeroDivisionError and the run waited for audio).
    code, out, err = run(["live", "--headless", "--source", "sim", "--seconds", "0.5", "--jsonl", *extra], capsys)
    assert_one_error_line(code, out, err, needle)


# ---- Ctrl-C ------------------------------------------------------------------------------


def test_ctrl_c_ends_a_run_cleanly(tmp_path):
    env = {**os.environ, "RTANALYZER_CONFIG_DIR": str(tmp_path / "config"), "PYTHONUNBUFFERED": "1"}
    env.pop("RTANALYZER_DEBUG", None)
    started = time.monotonic()
    proc = subprocess.Popen(
        [sys.executable, "-m", "rtanalyzer", "live", "--headless", "--source", "sim"],
        cwd=ROOT, env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
    )
    try:
        # Wait for the first readout line (start-up may be slow on a busy machine), then for
        # about 1.5 s of running in all, before the interrupt.
        sel = selectors.DefaultSelector()
        sel.register(proc.stdout, selectors.EVENT_READ)
        assert sel.select(timeout=30), "no readout within 30 s"
        first = proc.stdout.readline()
        time.sleep(max(0.0, 1.5 - (time.monotonic() - started)))
        proc.send_signal(signal.SIGINT)
        rest, err = proc.communicate(timeout=15)
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()
    err = err.decode()
    assert proc.returncode == 0, err
    assert "Traceback" not in err
    assert first.strip()


def test_a_negative_carrier_on_one_channel_stops_before_any_audio(capsys):
    code, out, err = run(["live", "--headless", "--source", "sim", "--carrier", "-400", "--seconds", "2"], capsys)
    assert_one_error_line(code, out, err, "positive audio frequency")


def test_a_usage_error_names_the_command_once_and_where_help_is(capsys):
    code, out, err = run(["live", "--headless", "--carrier", "banana"], capsys)
    assert_one_error_line(code, out, err, "invalid float value")
    assert err.count("rtanalyzer") == 2 and "see: rtanalyzer live --help" in err


def test_piped_sweep_lines_carry_figures_and_their_step(capsys):
    # Not a terminal: one line a second, made from the newest readout with figures (a settling
    # readout must not hide them), each saying which step of the sweep it is.
    code, out, _ = run(["live", "--headless", "--source", "sim", "--generate", "sweep", "--seconds", "3.5"], capsys)
    lines = [line for line in out.splitlines() if line.startswith("sweep step")]
    assert code == 0 and len(lines) >= 2
    assert all("opposite sideband" in line and " dB" in line for line in lines)


@pytest.mark.parametrize("argv,needle", [
    (["--tone", "-5"], "--tone: frequency_hz = -5.0 is out of range"),
    (["--generate", "multitone", "--band", "-200", "3000"], "--band: low_hz = -200.0 is out of range"),
])
def test_a_bad_signal_option_is_named_as_typed(capsys, argv, needle):
    code, out, err = run(["live", "--headless", "--source", "sim", "--seconds", "1", *argv], capsys)
    assert_one_error_line(code, out, err, needle)
