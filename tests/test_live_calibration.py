"""Calibration profiles applied to live readouts: the same corrections as `analyze --calibration`.

Oracles: the simulated bench's exact truth (sources/bench/truth.py, the exciter's own
suppression before the receiver) and an injected, known channel mismatch. The engine is stepped
by hand as in test_live_engine.py.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from scipy import signal as sps

from rtanalyzer.cli.main import main
from rtanalyzer.errors import RtaError
from rtanalyzer.generator.signals import Multitone, Tone
from rtanalyzer.live.session import SessionConfig, build_engine
from rtanalyzer.measurements.calibration import make_channels_profile, make_passband_profile, write_profile
from rtanalyzer.sources.bench.knobs import BenchKnobs
from rtanalyzer.sources.bench.model import passband_sos
from rtanalyzer.sources.capture import Signal
from rtanalyzer.sources.wavfile import write_capture

RATE = 48000
# A receiver whose high edge (4th order at 5.5 kHz) tilts a 1 kHz tone's wanted side at 5 kHz
# against its unwanted side at 3 kHz by a few dB: uncorrected, the figure is wrong by that tilt.
TILTED = BenchKnobs(rx_high_hz=5500.0, rx_order=4, noise_dbfs=-140.0)


@pytest.fixture(autouse=True)
def _profiles(tmp_path, monkeypatch, cautions_already_shown):
    monkeypatch.setenv("RTANALYZER_CALIBRATION_DIR", str(tmp_path / "cal"))


def _feed_and_read(engine, blocks: int = 60) -> dict:
    source = engine.source
    readout = None
    for _ in range(blocks):
        source.ring.write(source.render_block(source.block))
        readout = engine.step()
    assert readout is not None and readout.error is None, readout.error if readout else "no readout"
    return readout.result


def _receiver_profile(knobs: BenchKnobs, name: str = "rx") -> None:
    """A passband profile from a flat multitone through the bench receiver's own filter."""
    t = np.arange(4 * RATE) / RATE
    freqs = np.arange(500.0, 8001.0, 250.0)
    flat = sum(0.02 * np.cos(2 * np.pi * f * t + 0.7 * k * k) for k, f in enumerate(freqs))
    through = sps.sosfilt(passband_sos(knobs, RATE), flat)[RATE:]  # past the filter's start-up
    write_profile(make_passband_profile(Signal(through, float(RATE)), name, tuple(freqs)))


def test_passband_profile_brings_live_suppression_to_the_exciters_own():
    _receiver_profile(TILTED)
    config = SessionConfig(source="sim", signal=Tone(1000.0, -6.0), knobs=TILTED, measurement="sideband")
    plain = _feed_and_read(build_engine(config))
    engine = build_engine(config.with_changes(calibration=("rx",)))
    fixed = _feed_and_read(engine)
    truth = engine.source.truth()
    exciter = truth["exciter"]["sideband_suppression_db"][0]
    tilt = plain["worst_sideband_suppression_db"] - exciter
    assert abs(tilt) > 1.0, "the receiver should tilt the uncorrected figure"
    # 0.3 dB: the live window's reading spread (test_live_engine.py); the profile itself is exact
    # at 3 and 5 kHz (points there), so nothing else should be left.
    assert fixed["worst_sideband_suppression_db"] == pytest.approx(exciter, abs=0.3)
    assert fixed["calibration"] == ["rx"] and plain["calibration"] == []
    assert fixed["points"][0]["passband_correction_db"] == pytest.approx(-tilt, abs=0.3)


def test_channels_profile_removes_an_input_mismatch_from_live_network_readouts(tmp_path):
    # Left = I, right = Q of an ideal network at 300/1000/2500 Hz, the right input 0.2 dB hot and
    # 0.5 degrees late: the analysis must read 90.0 degrees and 0 dB once the profile is applied.
    t = np.arange(6 * RATE) / RATE
    freqs = (300.0, 1000.0, 2500.0)
    g, lag = 10 ** (0.2 / 20), np.radians(0.5)
    left = sum(0.1 * np.cos(2 * np.pi * f * t) for f in freqs)
    right = sum(0.1 * g * np.cos(2 * np.pi * f * t - np.pi / 2 - lag) for f in freqs)
    same = sum(0.1 * np.cos(2 * np.pi * f * t + 1.0) for f in freqs)  # one source into both inputs
    write_profile(make_channels_profile(Signal(same + 1j * g * sum(0.1 * np.cos(2 * np.pi * f * t + 1.0 - lag)
                                                                    for f in freqs), float(RATE)), "card"))
    path = tmp_path / "network.wav"
    write_capture(path, np.column_stack([left, right]), float(RATE))
    config = SessionConfig(source="file", file=str(path), measurement="quadrature", tones_hz=freqs)
    raw = _feed_and_read(build_engine(config), 40)
    fixed = _feed_and_read(build_engine(config.with_changes(calibration=("card",))), 40)
    assert max(abs(abs(p["phase_error_deg"]) - 0.5) for p in raw["points"]) < 0.05
    # Targets of the calibration (±0.02 degrees, ±0.01 dB), here on a live window of 85 ms.
    for p in fixed["points"]:
        assert abs(p["phase_error_deg"]) < 0.02 and abs(p["amplitude_ratio_db"]) < 0.01
    assert fixed["calibration"] == ["card"]


def test_profile_that_cannot_apply_is_refused_before_audio_starts():
    _receiver_profile(TILTED)
    with pytest.raises(RtaError, match="passband.*not to quadrature"):
        build_engine(SessionConfig(source="sim", measurement="quadrature", calibration=("rx",)))
    with pytest.raises(RtaError, match="not found"):
        build_engine(SessionConfig(source="sim", signal=Tone(1000.0, -6.0), calibration=("nothing-here",)))


def test_channels_profile_on_one_channel_is_refused():
    t = np.arange(RATE) / RATE
    x = 0.1 * np.cos(2 * np.pi * 1000 * t)
    write_profile(make_channels_profile(Signal(x + 1j * x, float(RATE)), "card"))
    with pytest.raises(RtaError, match="stereo view"):
        build_engine(SessionConfig(source="sim", signal=Tone(1000.0, -6.0), calibration=("card",)))


def test_profile_at_another_rate_is_refused(capsys):
    _receiver_profile(TILTED)
    code = main(["live", "--headless", "--source", "sim", "--rate", "96000", "--calibration", "rx",
                 "--seconds", "1"])
    err = capsys.readouterr().err.strip().splitlines()
    assert code != 0 and len(err) == 1 and "made at 48000 Hz" in err[0] and "96000" in err[0]


def test_cli_live_names_the_profile_in_every_readout(capsys):
    _receiver_profile(BenchKnobs())
    code = main(["live", "--jsonl", "--source", "sim", "--calibration", "rx", "--seconds", "1.2"])
    out = capsys.readouterr().out.splitlines()
    readouts = [json.loads(line) for line in out]
    figures = [r for r in readouts if r.get("worst_sideband_suppression_db") is not None]
    assert code == 0 and figures
    assert all(r["calibration"] == ["rx"] for r in figures)


def test_cli_live_runs_the_network_measurement(capsys):
    code = main(["live", "--headless", "--source", "sim", "--measure", "quadrature", "--generate", "multitone",
                 "--band", "300", "3000", "--count", "8", "--seconds", "1.2"])
    out = capsys.readouterr().out
    assert code == 0
    assert "phase I-Q" in out and " µs at " in out and "band 300-3000 Hz" in out


def test_multitone_sideband_live_is_one_point_per_tone():
    tones = Multitone.spread(300.0, 3000.0, 8, -10.0)
    config = SessionConfig(source="sim", signal=tones, measurement="sideband", resolution_hz=5.0)
    result = _feed_and_read(build_engine(config), 80)
    assert [p["tone_hz"] for p in result["points"]] == pytest.approx(list(tones.frequencies_hz))
