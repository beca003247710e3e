"""`rtanalyzer analyze sideband|twotone FILE ...`: figures as one JSON object, errors as one line.

Every bad input must give one line on stderr ("rtanalyzer: error: ..."), no traceback, a
non-zero exit code, nothing on stdout, and leave the input file byte-for-byte unchanged.
WAV files are written with soundfile (libsndfile) directly, not with the code under test.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from conftest import file_digest, sigma_for_bin_level, synth, write_wav
from conftest import run_cli as run

RATE = 48000
NOISE = sigma_for_bin_level(-115.0, 32768)  # ~ a good 24-bit card per 1.5 Hz bin (common practice, no source)
ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(autouse=True)
def _quiet(cautions_already_shown):
    """Every test here runs as a user who has already seen the first-run safety notice."""


def sideband_wav(tmp_path, name="sb.wav", suppression=40.0, carrier_db=50.0, **kw):
    comps = [(5000.0, -6.0, 0.3), (3000.0, -6.0 - suppression, 1.0), (4000.0, -6.0 - carrier_db, 2.0)]
    return write_wav(tmp_path / name, synth(comps, RATE, 1.0, NOISE, **kw))


# ---- good input --------------------------------------------------------------------------


def test_sideband_json_is_exactly_one_object(tmp_path, capsys):
    # Carrier 4000 Hz, tones 500 and 1000 Hz above it, unwanted 30 and 40 dB down.
    comps = [(4500.0, -10.0, 0.1), (5000.0, -10.0, 0.2), (3500.0, -40.0, 0.3), (3000.0, -50.0, 0.4)]
    wav = write_wav(tmp_path / "two.wav", synth(comps, RATE, 1.0, NOISE, seed=1))
    argv = ["analyze", "sideband", wav, "--tone", 1000, "--tone", 500, "--carrier", 4000, "--json"]
    code, out, err = run(argv, capsys)
    assert (code, err) == (0, "")
    figures = json.loads(out)  # the whole of stdout is one JSON object
    assert isinstance(figures, dict)
    assert [p["tone_hz"] for p in figures["points"]] == [500.0, 1000.0]
    assert [p["sideband_suppression_db"] for p in figures["points"]] == pytest.approx([30.0, 40.0], abs=0.2)
    assert figures["worst_sideband_suppression_db"] == pytest.approx(30.0, abs=0.2)
    assert figures["analysis_bandwidth_hz"] > 0 and figures["noise_floor_dbfs"] < -100


def test_sideband_text_output(tmp_path, capsys):
    wav = sideband_wav(tmp_path)
    code, out, err = run(["analyze", "sideband", wav, "--tone", 1000, "--carrier", 4000], capsys)
    assert (code, err) == (0, "")
    assert "40.0 dB" in out  # the suppression, to 0.1 dB
    assert "noise floor" in out


def test_sideband_from_a_16_bit_file(tmp_path, capsys):
    # 16-bit quantization noise (~-101 dBFS per 1.5 Hz bin) leaves a 40 dB figure intact.
    comps = [(5000.0, -6.0, 0.3), (3000.0, -46.0, 1.0)]
    wav = write_wav(tmp_path / "pcm16.wav", synth(comps, RATE, 1.0, 0.0), subtype="PCM_16")
    code, out, _ = run(["analyze", "sideband", wav, "--tone", 1000, "--carrier", 4000, "--json"], capsys)
    assert code == 0
    assert json.loads(out)["points"][0]["sideband_suppression_db"] == pytest.approx(40.0, abs=0.2)


def test_channel_two_through_the_cli(tmp_path, capsys):
    # Conventions: --channel counts from 1 (1 = left, 2 = right).
    left = synth([(5000.0, -6.0, 0.3), (3000.0, -26.0, 1.0)], RATE, 1.0, NOISE, 2)
    right = synth([(5000.0, -6.0, 0.3), (3000.0, -51.0, 1.0)], RATE, 1.0, NOISE, 3)
    wav = write_wav(tmp_path / "stereo.wav", np.column_stack([left, right]))
    argv = ["analyze", "sideband", wav, "--tone", 1000, "--carrier", 4000, "--channel", 2, "--json"]
    code, out, _ = run(argv, capsys)
    assert code == 0
    assert json.loads(out)["points"][0]["sideband_suppression_db"] == pytest.approx(45.0, abs=0.2)


def test_iq_through_the_cli(tmp_path, capsys):
    # Conventions (I/Q): I left, Q right; complex tone with I and Q of peak A reads 20*log10(A).
    comps = [(1000.0, -10.0, 0.3), (-1000.0, -45.0, 1.0)]
    iq = synth(comps, RATE, 1.0, sigma_for_bin_level(-115.0, 32768, iq=True), 4, iq=True)
    wav = write_wav(tmp_path / "iq.wav", iq)
    code, out, _ = run(["analyze", "sideband", wav, "--tone", 1000, "--carrier", 0, "--iq", "--json"], capsys)
    assert code == 0
    p = json.loads(out)["points"][0]
    assert p["wanted_dbfs"] == pytest.approx(-10.0, abs=0.05)
    assert p["unwanted_hz"] == pytest.approx(-1000.0, abs=0.1)
    assert p["sideband_suppression_db"] == pytest.approx(35.0, abs=0.2)


def test_twotone_json_and_text(tmp_path, capsys):
    comps = [(1000.0, -12.0, 0.1), (1200.0, -12.0, 0.7), (800.0, -52.0, 0.3), (1400.0, -52.0, 1.3)]
    wav = write_wav(tmp_path / "tt.wav", synth(comps, RATE, 1.0, NOISE, 5))
    code, out, err = run(["analyze", "twotone", wav, "--tones", 1200, 1000, "--json"], capsys)
    assert (code, err) == (0, "")
    figures = json.loads(out)
    assert figures["tone_hz"] == sorted(figures["tone_hz"])
    assert figures["tone_hz"] == pytest.approx([1000.0, 1200.0], abs=0.05)
    imd3 = figures["imd"][0]
    assert imd3["order"] == 3
    assert imd3["lower_dbc"] == pytest.approx(-40.0, abs=0.2)
    # Conventions: dB PEP = dBc - 6.02 for equal tones.
    assert imd3["worst_db_pep"] == pytest.approx(-40.0 - 20 * np.log10(2), abs=0.2)
    code, out, err = run(["analyze", "twotone", wav, "--tones", 1000, 1200], capsys)
    assert (code, err) == (0, "")
    assert "IMD3" in out and "PEP" in out


def test_first_run_notice_keeps_json_clean(tmp_path, capsys, monkeypatch):
    # The safety notice comes with the first command that drives or listens to a rig (here the
    # live analyzer on the simulated bench), on stderr: stdout stays one JSON object a line.
    # A measurement of a file shows no notice, so its errors stay one line.
    monkeypatch.setenv("RTANALYZER_CONFIG_DIR", str(tmp_path / "fresh-config"))
    wav = sideband_wav(tmp_path)
    code, out, err = run(["analyze", "sideband", wav, "--tone", 1000, "--carrier", 4000, "--json"], capsys)
    assert code == 0
    assert json.loads(out)["measurement"] == "sideband"
    assert err == ""
    code, out, err = run(["live", "--headless", "--source", "sim", "--seconds", "0.6", "--jsonl"], capsys)
    assert code == 0
    lines = out.splitlines()
    assert lines and all(json.loads(line)["measurement"] == "sideband" for line in lines)
    assert "Safety" in err or "safety" in err
    code, out, err = run(["live", "--headless", "--source", "sim", "--seconds", "0.3", "--jsonl"], capsys)
    assert "afety" not in err  # once per user


# ---- bad input ---------------------------------------------------------------------------


def _bytes_of_a_wav(tmp_path) -> bytes:
    p = write_wav(tmp_path / "whole.wav", synth([(1000.0, -6.0, 0.0)], RATE, 0.1), subtype="PCM_16")
    data = p.read_bytes()
    p.unlink()
    return data


def _make(kind: str, tmp_path: Path) -> tuple[Path, list]:
    """A bad input file (or none) and the extra arguments that go with it."""
    p = tmp_path / f"{kind}.wav"
    sb = ["--tone", 1000, "--carrier", 4000]
    if kind == "missing":
        return p, sb
    if kind == "empty":
        p.write_bytes(b"")
    elif kind == "random_bytes":
        p.write_bytes(bytes(np.random.default_rng(0).integers(0, 256, 4096, dtype=np.uint8)))
    elif kind == "truncated_header":
        p.write_bytes(_bytes_of_a_wav(tmp_path)[:30])
    elif kind == "text_file":
        p.write_text("this is a note about the exciter, not a recording\n" * 40, encoding="utf-8")
    elif kind in ("nan_samples", "inf_samples"):
        x = synth([(5000.0, -6.0, 0.0)], RATE, 1.0)
        x[1234] = np.nan if kind == "nan_samples" else np.inf
        write_wav(p, x, subtype="FLOAT")
    elif kind == "digital_silence":
        write_wav(p, np.zeros(RATE), subtype="PCM_16")
    elif kind == "no_tone_near_plan":
        write_wav(p, synth([(5200.0, -6.0, 0.0)], RATE, 1.0, NOISE))
    elif kind == "plan_folds":
        write_wav(p, synth([(3500.0, -6.0, 0.0)], RATE, 1.0, NOISE))
        return p, ["--tone", 2000, "--carrier", 1500]
    elif kind == "plan_collides":
        write_wav(p, synth([(2500.0, -6.0, 0.0), (2505.0, -6.0, 1.0)], RATE, 1.0, NOISE))
        return p, ["--tone", 1000, "--tone", 1005, "--carrier", 1500]
    elif kind == "channel_missing":
        write_wav(p, synth([(5000.0, -6.0, 0.0)], RATE, 1.0, NOISE))
        return p, sb + ["--channel", 3]
    elif kind == "channel_zero":
        write_wav(p, np.column_stack([synth([(5000.0, -6.0, 0.0)], RATE, 1.0, NOISE)] * 2))
        return p, sb + ["--channel", 0]
    elif kind == "channel_and_iq":
        write_wav(p, np.column_stack([synth([(5000.0, -6.0, 0.0)], RATE, 1.0, NOISE)] * 2))
        return p, sb + ["--channel", 1, "--iq"]
    elif kind == "iq_on_mono":
        write_wav(p, synth([(5000.0, -6.0, 0.0)], RATE, 1.0, NOISE))
        return p, sb + ["--iq"]
    elif kind == "too_short":
        write_wav(p, synth([(5000.0, -6.0, 0.0)], RATE, 0.005))
    else:
        raise AssertionError(kind)
    return p, sb


BAD_KINDS = [
    "missing", "empty", "random_bytes", "truncated_header", "text_file", "nan_samples",
    "inf_samples", "digital_silence", "no_tone_near_plan", "plan_folds", "plan_collides",
    "channel_missing", "channel_zero", "channel_and_iq", "iq_on_mono", "too_short",
]

# What the single line must mention, so a person at the bench knows what to fix.
MENTIONS = {
    "missing": "no such file",
    "empty": "empty",
    "random_bytes": "not a sound file",
    "truncated_header": "truncated",
    "text_file": "text",
    "nan_samples": "NaN",
    "inf_samples": "infinite",
    "digital_silence": "silence",
    "no_tone_near_plan": "no tone",
    "plan_folds": "fold",
    "plan_collides": "collide",
    "channel_missing": "channel 3",
    "channel_and_iq": "--iq",
    "iq_on_mono": "--iq",
    "too_short": "short",
}


@pytest.mark.parametrize("json_flag", [False, True])
@pytest.mark.parametrize("kind", BAD_KINDS)
def test_bad_input_is_one_line_and_leaves_the_file_alone(kind, json_flag, tmp_path, capsys):
    path, extra = _make(kind, tmp_path)
    before = file_digest(path)
    argv = ["analyze", "sideband", path, *extra] + (["--json"] if json_flag else [])
    code, out, err = run(argv, capsys)
    assert code != 0
    assert out == ""
    lines = err.splitlines()
    assert len(lines) == 1, err
    assert lines[0].startswith("rtanalyzer: error: "), err
    assert "Traceback" not in err and "internal error" not in err
    if kind in MENTIONS:
        assert MENTIONS[kind] in lines[0], lines[0]
    assert file_digest(path) == before
    if kind == "missing":
        assert not path.exists()


@pytest.mark.parametrize(
    "extra, why",
    [
        (["--tones", 1000], "expected 2"),  # argparse: --tones takes two values
        (["--tones", 1000, 1200], "no partner"),  # only one tone in the capture
    ],
)
def test_twotone_bad_input_is_one_line(extra, why, tmp_path, capsys):
    wav = write_wav(tmp_path / "one.wav", synth([(1000.0, -6.0, 0.0)], RATE, 1.0, NOISE))
    before = file_digest(wav)
    code, out, err = run(["analyze", "twotone", wav, *extra, "--json"], capsys)
    assert code != 0 and out == ""
    assert len(err.splitlines()) == 1 and err.startswith("rtanalyzer: error: ")
    assert why in err
    assert file_digest(wav) == before


def test_unknown_measurement_is_one_line(tmp_path, capsys):
    wav = sideband_wav(tmp_path)
    code, out, err = run(["analyze", "nosuch", wav], capsys)
    assert code != 0 and out == ""
    assert len(err.splitlines()) == 1 and err.startswith("rtanalyzer: error: ")


def test_real_entry_point_prints_no_traceback(tmp_path):
    # The installed entry point, in a fresh interpreter: a text file given as the capture.
    bad = tmp_path / "notes.wav"
    bad.write_text("not audio at all\n" * 10, encoding="utf-8")
    before = file_digest(bad)
    env = dict(os.environ)
    env.pop("RTANALYZER_DEBUG", None)
    proc = subprocess.run(
        [sys.executable, "-m", "rtanalyzer", "analyze", "sideband", str(bad), "--tone", "1000", "--json"],
        capture_output=True, text=True, timeout=120, cwd=str(ROOT), env=env, stdin=subprocess.DEVNULL,
    )
    assert proc.returncode != 0
    assert proc.stdout == ""
    assert "Traceback" not in proc.stderr
    lines = proc.stderr.splitlines()
    assert len(lines) == 1, proc.stderr
    assert lines[0].startswith("rtanalyzer: error: ") and "notes.wav" in lines[0]
    assert file_digest(bad) == before
