"""Diagnosis: error model fitted to quadrature or sideband points, and the trimmer probe."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from conftest import write_wav
from rtanalyzer.cli.main import main
from rtanalyzer.dsp.quadrature import image_rejection_db
from rtanalyzer.errors import MeasurementError
from rtanalyzer.measurements.diagnosis import diagnose_quadrature, diagnose_sideband, probe
from rtanalyzer.measurements.network_design import read_network

ROOT = Path(__file__).resolve().parents[1]
EXAMPLE = ROOT / "examples" / "bench.network"
FREQS = np.geomspace(300.0, 3000.0, 12)
RATE = 48000


@pytest.fixture(autouse=True)
def _quiet(cautions_already_shown):
    """CLI calls run as a user who has already seen the first-run notice."""


def irr(ratio_db, eps_deg):
    """Image-rejection relation (Razavi, RF Microelectronics), written out here independently."""
    g = 10 ** (np.asarray(ratio_db) / 20)
    c = np.cos(np.radians(eps_deg))
    return 10 * np.log10((1 + 2 * g * c + g * g) / (1 - 2 * g * c + g * g))


def quad_points(ratio_db, offset_deg, network=None):
    design = network.difference_deg(FREQS) if network is not None else np.full(FREQS.size, 90.0)
    diff = design + offset_deg
    return [{"frequency_hz": float(f), "phase_difference_deg": float(d), "amplitude_ratio_db": ratio_db,
             "predicted_suppression_db": float(irr(ratio_db, abs(d) - 90))} for f, d in zip(FREQS, diff)]


def test_constant_errors_are_found_with_their_direction():
    d = diagnose_quadrature(quad_points(-0.15, 0.4))
    assert d["amplitude_offset_db"] == pytest.approx(-0.15, abs=1e-9)
    assert d["phase_trim_deg"] == pytest.approx(-0.4, abs=1e-9)
    assert d["advice"][0] == "amplitude: raise Q by 0.15 dB (or lower I by as much)"
    assert d["advice"][1].startswith("phase: bring I and Q 0.40° closer together")
    # With nothing frequency-dependent left, trims reach the relation's cap (perfect balance).
    assert d["after_trims_worst_predicted_suppression_db"] > 100


def test_network_ripple_is_the_limit_no_trim_fixes():
    net = read_network(EXAMPLE)
    d = diagnose_quadrature(quad_points(0.05, -0.3, net), net)
    assert d["ripple_source"] == "network"
    assert d["phase_offset_deg"] == pytest.approx(-0.3, abs=1e-9)
    error = np.abs(net.difference_deg(FREQS)) - 90
    half = (error.max() - error.min()) / 2  # minimax constant leaves half the range (standard result)
    assert d["after_trims_worst_predicted_suppression_db"] == pytest.approx(float(irr(0.0, half)), abs=0.01)
    assert any("network's ripple limits you to" in a and "no trim fixes that" in a for a in d["advice"])
    assert d["advice"][0] == "amplitude: lower Q by 0.05 dB (or raise I by as much)"


def test_which_error_limits_now():
    # 0.1 dB alone allows 44.8 dB, 1 degree alone 41.2 dB (conventions' check values): phase limits.
    d = diagnose_quadrature(quad_points(0.1, 1.0))
    assert d["amplitude_alone_limit_db"] == pytest.approx(44.8, abs=0.05)
    assert d["phase_alone_limit_db"] == pytest.approx(41.2, abs=0.05)
    assert d["limited_now_by"] == "phase"
    assert d["now_worst_predicted_suppression_db"] == pytest.approx(39.6, abs=0.05)


def test_sideband_magnitudes_cannot_tell_the_sign():
    a = [{"tone_hz": float(f), "sideband_suppression_db": float(irr(0.1, 0.5)), "unwanted_detected": True}
         for f in FREQS]
    b = [{"tone_hz": float(f), "sideband_suppression_db": float(irr(-0.1, -0.5)), "unwanted_detected": True}
         for f in FREQS]
    da, db = diagnose_sideband(a), diagnose_sideband(b)
    assert da["sign_known"] is False and da["error_as_phase_deg"] == db["error_as_phase_deg"]
    assert any("cannot tell" in x for x in da["advice"]) and any("probe" in x for x in da["advice"])


def test_sideband_with_known_ripple_recovers_the_phase_sign():
    net = read_network(EXAMPLE)
    ripple = np.abs(net.difference_deg(FREQS)) - 90
    pts = [{"tone_hz": float(f), "sideband_suppression_db": float(irr(0.0, r + 0.8)), "unwanted_detected": True}
           for f, r in zip(FREQS, ripple)]
    d = diagnose_sideband(pts, net)
    assert d["sign_known"] is True
    assert d["phase_offset_deg"] == pytest.approx(0.8, abs=0.05)


def reading(eps_deg, ratio_db=0.0):
    return {"measurement": "sideband",
            "points": [{"tone_hz": 1000.0, "sideband_suppression_db": float(irr(ratio_db, eps_deg)),
                        "unwanted_detected": True}]}


def test_probe_direction_and_distance():
    assert probe([reading(1.0), reading(0.7)])["direction"] == "keep"
    assert probe([reading(0.7), reading(1.0)])["direction"] == "reverse"
    assert probe([reading(1.0), reading(1.001)])["direction"] == "unclear"
    # Error power is a parabola in the trimmer position (image-rejection relation, small errors):
    # phase errors 1.0, 0.6, 0.2 degrees at nudges 0, 1, 2 put the best at 2.5 nudges.
    three = probe([reading(1.0, 0.1), reading(0.6, 0.1), reading(0.2, 0.1)])
    assert three["best_position_nudges"] == pytest.approx(2.5, abs=0.02)
    assert three["direction"] == "keep"
    overshoot = probe([reading(0.4), reading(-0.2), reading(-0.8)])
    assert overshoot["best_position_nudges"] == pytest.approx(2 / 3, abs=0.02)
    assert overshoot["direction"] == "reverse"


def test_probe_rejects_mixed_or_disjoint_readings():
    with pytest.raises(MeasurementError, match="mix"):
        probe([reading(1.0), {"measurement": "quadrature", "points": []}])
    other = {"measurement": "sideband", "points": [{"tone_hz": 2000.0, "sideband_suppression_db": 40.0}]}
    with pytest.raises(MeasurementError, match="share no tone"):
        probe([reading(1.0), other])


def test_cli_diagnose_capture_and_probe(tmp_path, capsys):
    t = np.arange(2 * RATE) / RATE
    left = sum(0.3 * np.cos(2 * np.pi * f * t) for f in (500.0, 1500.0))
    right = sum(0.3 * 10 ** (-0.2 / 20) * np.cos(2 * np.pi * f * t - np.radians(90.5)) for f in (500.0, 1500.0))
    wav = write_wav(tmp_path / "net.wav", np.column_stack([left, right]))
    code = main(["diagnose", str(wav), "--json"])
    out = capsys.readouterr()
    assert code == 0 and out.err == ""
    d = json.loads(out.out)
    assert d["amplitude_offset_db"] == pytest.approx(-0.2, abs=0.01)
    assert d["advice"][0].startswith("amplitude: raise Q by 0.20 dB")
    before, after = tmp_path / "before.json", tmp_path / "after.json"
    before.write_text(json.dumps(reading(1.0)))
    after.write_text(json.dumps(reading(1.4)))
    code = main(["diagnose", "probe", str(before), str(after)])
    out = capsys.readouterr()
    assert code == 0 and "turn the other way" in out.out
    code = main(["diagnose", "probe", str(before)])
    assert code == 2 and capsys.readouterr().err.count("\n") == 1


def test_probe_on_the_simulated_bench_finds_the_best_phase_trim():
    # The bench's exact truth: with the phase trim at t the error at 1 kHz is
    # network error + LO error - t (sources/bench/network.py), so the best trim is known exactly.
    from rtanalyzer.measurements.sideband import SidebandMeasurement
    from rtanalyzer.sources.bench import BenchKnobs, simulate_capture
    from rtanalyzer.sources.bench.network import quadrature_error_rad
    from rtanalyzer.sources.capture import Capture

    step = 0.5
    readings = []
    for k in range(3):
        knobs = BenchKnobs().with_changes(phase_trim_deg=k * step)
        samples, _ = simulate_capture(knobs, [1000.0], 1.0, RATE, None, k)
        signal = Capture(samples, float(RATE)).view(channel=1)
        readings.append(SidebandMeasurement().measure(signal, {"tone": [1000.0], "carrier": 4000.0}).to_json())
    knobs0 = BenchKnobs().with_changes(phase_trim_deg=0.0)
    best_trim = float(np.degrees(quadrature_error_rad(np.array([1000.0]), knobs0))[0])
    out = probe(readings)
    assert out["best_position_nudges"] * step == pytest.approx(best_trim, abs=0.05)


def test_sideband_variation_counts_only_measured_points():
    # Two measured points 0.5 dB apart and two lower bounds far higher: the suppression is not
    # shown to vary across the band (a bound says "at least", not where the residue is).
    points = [
        {"tone_hz": 400.0, "sideband_suppression_db": 40.0, "unwanted_detected": True},
        {"tone_hz": 800.0, "sideband_suppression_db": 40.5, "unwanted_detected": True},
        {"tone_hz": 1600.0, "sideband_suppression_db": 55.0, "unwanted_detected": False},
        {"tone_hz": 2400.0, "sideband_suppression_db": 60.0, "unwanted_detected": False},
    ]
    d = diagnose_sideband(points)
    assert d["variation_db"] == 0.5
    assert not any("varies" in line for line in d["advice"])
