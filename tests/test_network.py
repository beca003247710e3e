"""Network design check: the network file format, ideal phase difference, tolerance spread, CLI."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from conftest import write_wav
from rtanalyzer.cli.main import main
from rtanalyzer.errors import PlanError
from rtanalyzer.measurements.network_design import (
    Network,
    design_report,
    monte_carlo,
    parse_network,
    parse_value,
    read_network,
)
from rtanalyzer.sources.bench.network import EXAMPLE_I_CHAIN, EXAMPLE_Q_CHAIN

ROOT = Path(__file__).resolve().parents[1]
EXAMPLE = ROOT / "examples" / "bench.network"
RATE = 48000


@pytest.fixture(autouse=True)
def _quiet(cautions_already_shown):
    """CLI calls run as a user who has already seen the first-run notice."""


def allpass_deg(f, chain):
    """-2*atan(2*pi*f*R*C) per first-order all-pass section (textbook circuit theory), summed."""
    return sum(np.degrees(-2 * np.arctan(2 * np.pi * f * r * c)) for r, c in chain)


@pytest.mark.parametrize("token,value", [
    ("10k", 10e3), ("4k7", 4.7e3), ("4n7", 4.7e-9), ("4.7n", 4.7e-9), ("220000", 220e3),
    ("1e-8", 1e-8), ("1.2kΩ", 1.2e3), ("10nF", 10e-9), ("2M2", 2.2e6), ("100p", 100e-12), ("1µ", 1e-6),
])
def test_si_values(token, value):
    # SI prefixes (BIPM SI brochure) and the "4k7" habit of parts lists (common practice, no source).
    assert parse_value(token) == pytest.approx(value, rel=1e-12)


@pytest.mark.parametrize("bad", ["10x", "-10k", "0", "k10", "ten"])
def test_bad_values(bad):
    with pytest.raises(PlanError, match="component value"):
        parse_value(bad)


def test_example_file_is_the_bench_network():
    net = read_network(EXAMPLE)
    assert np.allclose(net.chain_i, EXAMPLE_I_CHAIN, rtol=1e-12) and np.allclose(net.chain_q, EXAMPLE_Q_CHAIN, rtol=1e-12)
    assert parse_network(net.text()) == Network(net.chain_i, net.chain_q, "network")  # round trip


def test_bad_lines_are_errors():
    with pytest.raises(PlanError, match=":2: expected"):
        parse_network("I 10k 10n\nX 10k 10n\nQ 1k 1n\n", "net")
    with pytest.raises(PlanError, match="Q chain has no section"):
        parse_network("I 10k 10n  # only I\n", "net")


def test_ideal_difference_is_the_allpass_phase():
    # First-order all-pass phase -2*atan(wRC) (textbook circuit theory), computed here independently.
    net = read_network(EXAMPLE)
    f = np.array([300.0, 665.0, 1000.0, 3000.0])
    expected = allpass_deg(f, EXAMPLE_I_CHAIN) - allpass_deg(f, EXAMPLE_Q_CHAIN)
    assert net.difference_deg(f) == pytest.approx(expected, abs=1e-9)
    # A single section lags 90 degrees at its corner 1/(2 pi R C) (same textbook result).
    single = Network(((10e3, 10e-9),), ((1.0, 1e-12),))
    assert single.difference_deg(1 / (2 * np.pi * 1e-4)) == pytest.approx(-90.0, abs=1e-5)


def test_design_report_matches_the_bench_figures():
    # The bench module's docstring states 88.94..89.81 degrees and 40.7 dB worst near 670 Hz for this network;
    # the worst suppression follows from the image-rejection relation with g = 1 (Razavi).
    r = design_report(read_network(EXAMPLE), (300.0, 3000.0))
    assert r["min_phase_difference_deg"] == pytest.approx(88.94, abs=0.01)
    assert r["max_phase_difference_deg"] == pytest.approx(89.81, abs=0.01)
    assert r["worst_predicted_suppression_db"] == pytest.approx(40.7, abs=0.05)
    assert r["worst_frequency_hz"] == pytest.approx(670.0, rel=0.03)
    # After the best constant trim the error is +/- half its range (minimax constant, standard result).
    half = (r["max_phase_difference_deg"] - r["min_phase_difference_deg"]) / 2
    assert r["ripple_deg"] == pytest.approx(half, abs=1e-9)
    assert r["trimmed_worst_predicted_suppression_db"] == pytest.approx(
        10 * np.log10((1 + np.cos(np.radians(half))) / (1 - np.cos(np.radians(half)))), abs=0.01)


def test_monte_carlo_limits():
    net = read_network(EXAMPLE)
    exact = monte_carlo(net, tolerance_r_pct=0.0, tolerance_c_pct=0.0, builds=50, target_db=40.0)
    # Zero tolerance: every build is the design (40.7 dB worst) and reaches 40 dB.
    assert exact["share_reaching_target"] == 1.0
    assert exact["worst_suppression_percentiles_db"]["50"] == pytest.approx(40.7, abs=0.05)
    loose = monte_carlo(net, tolerance_r_pct=1.0, tolerance_c_pct=5.0, builds=2000, target_db=40.0, seed=1)
    assert 0.0 <= loose["share_reaching_target"] <= loose["share_reaching_target_after_trim"] <= 1.0
    assert loose["worst_suppression_percentiles_db"]["50"] < 40.7  # spread parts do worse than the design
    with pytest.raises(PlanError, match="tolerance"):
        monte_carlo(net, tolerance_r_pct=-1.0)


def test_cli_network_json_and_overlay(tmp_path, capsys):
    # A capture of the example network driven by two tones, made with the all-pass phase directly.
    t = np.arange(2 * RATE) / RATE
    left = sum(0.3 * np.cos(2 * np.pi * f * t + np.radians(allpass_deg(f, EXAMPLE_I_CHAIN))) for f in (500.0, 2000.0))
    right = sum(0.3 * np.cos(2 * np.pi * f * t + np.radians(allpass_deg(f, EXAMPLE_Q_CHAIN))) for f in (500.0, 2000.0))
    wav = write_wav(tmp_path / "built.wav", np.column_stack([left, right]))
    code = main(["network", str(EXAMPLE), "--builds", "200", "--json", "--measured", str(wav)])
    out = capsys.readouterr()
    assert code == 0 and out.err == ""
    r = json.loads(out.out)
    assert r["tolerance"]["builds"] == 200
    assert [p["difference_deg"] for p in r["measured"]["points"]] == pytest.approx([0.0, 0.0], abs=0.02)
    code = main(["network", str(EXAMPLE), "--builds", "100"])
    text = capsys.readouterr().out
    assert code == 0 and "after a phase trim" in text and "°" in text


def test_cli_bad_network_file_is_one_line(tmp_path, capsys):
    bad = tmp_path / "bad.network"
    bad.write_text("I 10k\n")
    code = main(["network", str(bad)])
    err = capsys.readouterr().err
    assert code == 2 and err.count("\n") == 1 and "bad.network:1" in err


def test_the_simulated_network_is_driven_at_the_generators_level():
    # A two-tone at -6 dBFS PEP (PEP = A1 + A2 for two tones, each 6.02 dB below it) through the
    # stand-in network must peak near -6 dBFS on each output, not 6 dB above (an all-pass network
    # keeps each tone's amplitude; only the pair's relative phase moves the envelope's peak).
    from rtanalyzer.generator.signals import TwoTone
    from rtanalyzer.sources.bench.knobs import BenchKnobs
    from rtanalyzer.sources.network_source import NetworkSource

    src = NetworkSource(BenchKnobs(amplitude_trim_db=0.0), TwoTone(700.0, 1900.0, -6.0), 48000.0)
    out = np.concatenate([src.render_block(4800) for _ in range(10)])
    peaks_db = 20 * np.log10(np.max(np.abs(out), axis=0))
    assert np.all(peaks_db < -5.9) and np.all(peaks_db > -6.5)
