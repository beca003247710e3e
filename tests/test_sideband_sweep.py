"""`analyze sideband` on a recorded stepped sweep through the whole (simulated) exciter.

Oracle: the simulated bench's exact truth for each step's tone (sources/bench/truth.py), taken
while the bench renders that step. Tolerance 0.05 dB: each step's settled part is 0.4 s of a
clean capture, where the steady analysis stays within a few thousandths of a dB
(scripts/accuracy.py); 0.05 dB leaves room for the shorter span.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from rtanalyzer.cli.main import main
from rtanalyzer.generator.signals import Sweep
from rtanalyzer.measurements.sideband import SidebandMeasurement
from rtanalyzer.sources.bench.knobs import BenchKnobs
from rtanalyzer.sources.bench_source import BenchSource
from rtanalyzer.sources.capture import Signal
from rtanalyzer.sources.wavfile import write_capture

RATE = 48000
SWEEP = Sweep.log_range(300.0, 3000.0, 6, -6.0, dwell_s=0.5, settle_s=0.1)
TOLERANCE_DB = 0.05


@pytest.fixture(scope="module")
def sweep_capture():
    """(samples, truth per tone): the bench driven by SWEEP, one whole pass."""
    source = BenchSource(BenchKnobs(), SWEEP, RATE, 1024)
    blocks, truth = [], {}
    for _ in range(int(len(SWEEP.frequencies_hz) * SWEEP.dwell_s * RATE / 1024)):
        block = source.render_block(1024)
        source.ring.write(block)
        blocks.append(block)
        t = source.truth()
        truth[t["tones_hz"][0]] = t["points"][0]["sideband_suppression_db"]
    return np.concatenate(blocks), truth


def test_each_step_agrees_with_the_benchs_truth(sweep_capture, tmp_path, capsys, cautions_already_shown):
    samples, truth = sweep_capture
    path = tmp_path / "sweep.wav"
    write_capture(path, samples, float(RATE))
    rounded = [f"{f:.0f}" for f in SWEEP.frequencies_hz]  # step frequencies as a builder jots them down
    code = main(["analyze", "sideband", str(path), "--tone", *rounded, "--carrier", "4000", "--json"])
    out = json.loads(capsys.readouterr().out)
    assert code == 0 and out["sweep_steps"] == len(SWEEP.frequencies_hz) and out["warnings"] == []
    for p, (tone, expected) in zip(out["points"], sorted(truth.items())):
        assert p["tone_hz"] == pytest.approx(tone, abs=0.6)
        assert p["sideband_suppression_db"] == pytest.approx(expected, abs=TOLERANCE_DB)
    assert out["worst_sideband_suppression_db"] == pytest.approx(min(truth.values()), abs=TOLERANCE_DB)


def test_progress_is_reported_per_step(sweep_capture):
    samples, _ = sweep_capture
    calls = []
    SidebandMeasurement().measure(Signal(samples[:, 0], float(RATE)),
                                  {"tone": list(SWEEP.frequencies_hz), "carrier": 4000.0},
                                  progress=lambda done, total: calls.append((done, total)))
    n = len(SWEEP.frequencies_hz)
    assert calls == [(k, n) for k in range(1, n + 1)]


def test_steps_and_tones_that_do_not_match_are_said(sweep_capture):
    samples, _ = sweep_capture
    tones = list(SWEEP.frequencies_hz[1:]) + [3300.0]  # the first step missing, one tone never played
    r = SidebandMeasurement().measure(Signal(samples[:, 0], float(RATE)), {"tone": tones, "carrier": 4000.0})
    warnings = " | ".join(r.warnings)
    assert "matches no --tone" in warnings and "no step of the sweep played the 3300 Hz tone" in warnings
    assert len(r.points) == len(SWEEP.frequencies_hz) - 1 and r.sweep_steps == len(r.points)


def test_a_sweep_needs_the_carrier(sweep_capture, tmp_path, capsys, cautions_already_shown):
    samples, _ = sweep_capture
    path = tmp_path / "sweep.wav"
    write_capture(path, samples, float(RATE))
    code = main(["analyze", "sideband", str(path), "--tone", "300", "1000"])
    err = capsys.readouterr().err.strip().splitlines()
    assert code != 0 and len(err) == 1 and "stepped sweep" in err[0] and "--carrier" in err[0]


def test_a_steady_capture_is_not_taken_for_a_sweep():
    t = np.arange(2 * RATE) / RATE
    x = 0.5 * np.cos(2 * np.pi * 5000 * t) + 0.005 * np.cos(2 * np.pi * 3000 * t)
    r = SidebandMeasurement().measure(Signal(x, float(RATE)), {"tone": [1000.0], "carrier": 4000.0}).to_json()
    assert r["sweep_steps"] == 0
    assert r["points"][0]["sideband_suppression_db"] == pytest.approx(40.0, abs=0.01)  # 20·log10(0.5/0.005)
