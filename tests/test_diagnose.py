"""Diagnosis: error model fitted to quadrature or sideband points, and the trimmer probe."""

from __future__ import annotations

import json
import re
from pathlib import Path

import numpy as np
import pytest

from conftest import write_wav
from rtanalyzer.cli.main import main
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
    # 0.15 dB alone allows 41.3 dB, 0.4 degree alone 49.1 dB (image-rejection relation): amplitude
    assert d["amplitude_alone_limit_db"] == pytest.approx(float(irr(0.15, 0.0)), abs=0.01)
    assert d["limited_now_by"] == "amplitude" and d["now_worst_is_lower_bound"] is False
    # Nothing frequency-dependent left: after the trims only the points' resolution (4 decimals
    # in these old-style points) bounds the result, and it is said as a bound, never a number.
    assert d["ripple_above_noise"] is False and d["after_trims_worst_is_lower_bound"] is True
    assert 90 < d["after_trims_worst_predicted_suppression_db"] < 150
    assert not any("limits you to" in a for a in d["advice"])
    assert any(a.startswith("phase: no ripple above the noise") for a in d["advice"])


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
    # the measured ripple and the design's, apart; here the points follow the design
    design = allpass_deg(FREQS, I_CHAIN) - allpass_deg(FREQS, Q_CHAIN)
    design_half = (np.abs(design).max() - np.abs(design).min()) / 2
    assert d["points_follow_design"] is True and d["ripple_above_noise"] is True
    assert d["ripple_design_deg"] == pytest.approx(design_half, abs=1e-4)
    assert d["ripple_measured_deg"] == pytest.approx(design_half, abs=1e-4)
    assert any("the points follow the design" in a for a in d["advice"])


def allpass_deg(f, chain):
    """First-order all-pass phase, -2·atan(2πfRC) per section (textbook circuit theory)."""
    return sum(np.degrees(-2 * np.arctan(2 * np.pi * f * r * c)) for r, c in chain)


# examples/bench.network, written out: I 1.2k 7.5k 22k 68k, Q 3.9k 13k 36k 220k, 10 nF throughout
I_CHAIN = ((1_200.0, 10e-9), (7_500.0, 10e-9), (22_000.0, 10e-9), (68_000.0, 10e-9))
Q_CHAIN = ((3_900.0, 10e-9), (13_000.0, 10e-9), (36_000.0, 10e-9), (220_000.0, 10e-9))


def noisy_points(ratio_db, offset_deg, sigma_deg=1e-3, seed=0, ripple_deg=None):
    """Points as this version saves them: errors measured with noise of sigma (phase, degrees) and
    the same relative spread on the amplitude, each with its uncertainty."""
    rng = np.random.default_rng(seed)
    sigma_db = 20 / np.log(10) * np.radians(sigma_deg)
    ripple = np.zeros(FREQS.size) if ripple_deg is None else ripple_deg
    err = offset_deg + ripple + rng.normal(0, sigma_deg, FREQS.size)
    ratio = ratio_db + rng.normal(0, sigma_db, FREQS.size)
    from rtanalyzer.dsp.quadrature import noise_limited_suppression

    value, bound = noise_limited_suppression(ratio, err, sigma_db, sigma_deg)
    return [{"frequency_hz": float(f), "phase_difference_deg": 90.0 + float(e), "amplitude_ratio_db": float(r),
             "phase_uncertainty_deg": sigma_deg, "amplitude_uncertainty_db": sigma_db,
             "predicted_suppression_db": float(v), "predicted_suppression_is_bound": bool(b)}
            for f, e, r, v, b in zip(FREQS, err, ratio, value, bound)]


def test_errors_within_the_noise_name_no_limit_and_give_bounds():
    # Perfect quadrature measured to ±0.001°: no figure may be a number, no limiter named, no
    # ripple limit, and every bound below what 3σ errors allow (image-rejection relation).
    d = diagnose_quadrature(noisy_points(0.0, 0.0))
    ceiling = float(irr(3 * 20 / np.log(10) * np.radians(1e-3), 3e-3))
    assert d["limited_now_by"] is None
    for key in ("now_worst", "amplitude_alone", "phase_alone", "after_trims_worst"):
        flag = f"{key}_is_lower_bound"
        assert d[flag] is True, flag
    for key in ("now_worst_predicted_suppression_db", "phase_alone_limit_db", "after_trims_worst_predicted_suppression_db"):
        assert d[key] < ceiling, key
    assert d["summary"].startswith("no error above the noise: at least ") and d["summary"].endswith("across the band")
    assert not any("limits you to" in a or "limits now" in a for a in d["advice"])
    assert d["advice"][0].startswith("amplitude: balanced within the noise")
    assert d["advice"][1].startswith("phase: centred within the noise")


def test_a_network_the_points_do_not_follow_is_reported_apart():
    # Flat measured points against the example network (whose ripple is ±0.36°): the design's
    # ripple is stated as the design's, not as the limit of what was measured.
    net = read_network(EXAMPLE)
    d = diagnose_quadrature(noisy_points(0.0, 0.0), net)
    design = allpass_deg(FREQS, I_CHAIN) - allpass_deg(FREQS, Q_CHAIN)
    assert d["ripple_design_deg"] == pytest.approx((np.abs(design).max() - np.abs(design).min()) / 2, abs=1e-4)
    assert d["ripple_measured_deg"] < 0.01 and d["points_follow_design"] is False
    assert d["ripple_source"] == "residual" and d["limited_now_by"] is None
    assert not any("network's ripple limits you" in a for a in d["advice"])
    assert any("do not follow the design's ripple" in a for a in d["advice"])
    # the same points riding on the design's ripple follow it, and then it limits
    ripple = np.abs(design) - 90
    d = diagnose_quadrature(noisy_points(0.0, 0.0, ripple_deg=ripple), net)
    assert d["points_follow_design"] is True and d["ripple_source"] == "network"
    assert any("network's ripple limits you to" in a for a in d["advice"])
    assert d["after_trims_worst_is_lower_bound"] is False
    assert d["after_trims_worst_predicted_suppression_db"] == pytest.approx(
        float(irr(0.0, (ripple.max() - ripple.min()) / 2)), abs=0.02)  # minimax: half the range


def test_which_error_limits_now():
    # 0.1 dB alone allows 44.8 dB, 1 degree alone 41.2 dB (conventions' check values): phase limits.
    d = diagnose_quadrature(quad_points(0.1, 1.0))
    assert d["amplitude_alone_limit_db"] == pytest.approx(44.8, abs=0.05)
    assert d["phase_alone_limit_db"] == pytest.approx(41.2, abs=0.05)
    assert d["limited_now_by"] == "phase"
    assert d["now_worst_predicted_suppression_db"] == pytest.approx(39.6, abs=0.05)


@pytest.mark.parametrize("suppression_db,amplitude_db,phase_deg", [
    (32.9, 0.393, 2.595),  # the review's figures for 32.9 dB (exact relation, ε = 0 and g = 1)
    (22.3, 1.334, 8.776),  # the review's amplitude figure for 22.3 dB
])
def test_sideband_error_as_amplitude_or_phase_is_read_exactly(suppression_db, amplitude_db, phase_deg):
    points = [{"tone_hz": 1000.0, "sideband_suppression_db": suppression_db, "unwanted_detected": True}]
    d = diagnose_sideband(points)
    assert d["error_as_amplitude_db"] == pytest.approx(amplitude_db, abs=0.003)
    assert d["error_as_phase_deg"] == pytest.approx(phase_deg, abs=0.002)
    # and back through the relation itself (Razavi), to the figure we started from
    assert float(irr(d["error_as_amplitude_db"], 0.0)) == pytest.approx(suppression_db, abs=0.01)
    assert float(irr(0.0, d["error_as_phase_deg"])) == pytest.approx(suppression_db, abs=0.01)
    said = re.search(r"or (\d+\.\d{3}) dB if it is all amplitude", d["advice"][0])
    assert said and float(said.group(1)) == pytest.approx(amplitude_db, abs=0.003)


def test_sideband_bound_gives_errors_of_at_most():
    points = [{"tone_hz": 1000.0, "sideband_suppression_db": 60.0, "unwanted_detected": False}]
    d = diagnose_sideband(points)
    assert d["worst_is_lower_bound"] is True
    assert d["advice"][0].startswith("worst at least 60.0 dB at 1000 Hz: an error of at most ")
    assert "at most" in d["advice"][0].split(", or ")[1]


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


def test_cli_diagnose_an_error_free_capture_says_bounds(tmp_path, capsys):
    # Perfect quadrature in white noise (float file): the true suppression is unbounded, so the
    # diagnosis may only give bounds, name no limiter, and the network's design ripple is the
    # design's, not a limit of what was measured.
    t = np.arange(2 * RATE) / RATE
    noise = np.random.default_rng(3).normal(0.0, 1e-5, (2, t.size))
    left = sum(0.2 * np.cos(2 * np.pi * f * t) for f in (400.0, 800.0, 1600.0, 2400.0)) + noise[0]
    right = sum(0.2 * np.sin(2 * np.pi * f * t) for f in (400.0, 800.0, 1600.0, 2400.0)) + noise[1]
    wav = write_wav(tmp_path / "q.wav", np.column_stack([left, right]), subtype="FLOAT")
    code = main(["diagnose", str(wav)])
    out = capsys.readouterr()
    assert code == 0 and out.err == ""
    assert "now: no error above the noise: at least " in out.out and "limits now" not in out.out
    assert "limits you to" not in out.out and "150.0" not in out.out and "200.0" not in out.out
    assert "after both trims: worst at least " in out.out
    code = main(["diagnose", str(wav), "--network", str(EXAMPLE), "--json"])
    d = json.loads(capsys.readouterr().out)
    assert d["points_follow_design"] is False and d["ripple_design_deg"] > 0.3 and d["ripple_measured_deg"] < 0.001
    assert d["limited_now_by"] is None and d["now_worst_is_lower_bound"] is True
    assert not any("network's ripple limits you" in a for a in d["advice"])
