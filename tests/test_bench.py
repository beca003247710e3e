"""The simulated bench: its all-pass network, truth figures, streaming, clipping and the CLI.

Each check names its outside reference in a comment. "Flat receiver" settings (rate 192 kHz,
passband 1 Hz..86.4 kHz) keep the receiver's |H(f)| within 1e-4 dB of unity at the audio
frequencies used, so truth levels can be compared with formulas to 0.01 dB.
"""

from __future__ import annotations

import io
import json
import math

import numpy as np
import pytest
import soundfile as sf
from scipy import signal

from rtanalyzer.dsp.allpass import chain_phase_rad, pair_difference_rad, section_phase_rad
from rtanalyzer.sources.bench import Bench, BenchError, BenchKnobs, image_rejection_db, simulate_capture
from rtanalyzer.sources.bench.network import EXAMPLE_I_CHAIN, EXAMPLE_Q_CHAIN
from rtanalyzer.sources.capture import Capture

ALIGNED = dict(network="ideal", amplitude_trim_db=0.0, phase_trim_deg=0.0, lo_quadrature_error_deg=0.0,
               carrier_leak_dbc=-200.0, amplifier="linear")
FLAT_RX = dict(rx_low_hz=1.0, rx_high_hz=96_000.0)
FLAT_RATE = 192_000


def _relation(gain_db: float, error_deg: float) -> float:
    """Image-rejection relation written out here (Razavi, RF Microelectronics, image-reject architectures)."""
    g, e = 10 ** (gain_db / 20), math.radians(error_deg)
    return 10 * math.log10((1 + 2 * g * math.cos(e) + g * g) / (1 - 2 * g * math.cos(e) + g * g))


# --- all-pass network -------------------------------------------------------------------------

def test_first_order_section_phase_against_formula_and_scipy():
    r, c = 22_000.0, 10e-9
    f = np.geomspace(10.0, 100_000.0, 200)
    w = 2 * np.pi * f
    ours = section_phase_rad(f, r, c)
    # textbook circuit theory: a first-order all-pass lags by 2·atan(ωRC)
    np.testing.assert_allclose(ours, -2 * np.arctan(w * r * c), rtol=0, atol=1e-12)
    # scipy as reference: freqs of the analog all-pass (s - 1/RC)/(s + 1/RC); that inverting form
    # is the negative of (1 - sRC)/(1 + sRC), so its phase is ours + π.
    _, h = signal.freqs([1.0, -1.0 / (r * c)], [1.0, 1.0 / (r * c)], worN=w)
    np.testing.assert_allclose(np.angle(-h), ours, rtol=0, atol=1e-9)


def test_chain_phase_against_scipy_zpk_and_example_pair_ripple():
    f = np.geomspace(300.0, 3000.0, 500)
    w = 2 * np.pi * f
    # scipy as reference: the chain is the product of sections (1 - sRC)/(1 + sRC)
    taus = [r * c for r, c in EXAMPLE_I_CHAIN]
    _, h = signal.freqs_zpk([1 / t for t in taus], [-1 / t for t in taus], (-1) ** len(taus), worN=w)
    np.testing.assert_allclose(np.unwrap(np.angle(h)), chain_phase_rad(f, EXAMPLE_I_CHAIN), atol=1e-9)
    # the example network's documented in-band error: -1.06 ... -0.19 degrees (network.py docstring)
    err = np.degrees(pair_difference_rad(f, EXAMPLE_I_CHAIN, EXAMPLE_Q_CHAIN)) - 90.0
    assert -1.07 < err.min() < -1.05 and -0.20 < err.max() < -0.18


# --- image-rejection relation -----------------------------------------------------------------

@pytest.mark.parametrize(
    "gain_db, error_deg, expected_db",
    # check values computed from the relation (Razavi, RF Microelectronics, image-reject architectures)
    [(0.0, 1.0, 41.2), (0.0, 1.8, 36.1), (0.1, 0.0, 44.8), (0.1, 1.0, 39.6)],
)
def test_predicted_suppression_is_the_image_rejection_relation(gain_db, error_deg, expected_db):
    assert round(float(image_rejection_db(10 ** (gain_db / 20), math.radians(error_deg))), 1) == expected_db
    knobs = BenchKnobs(**{**ALIGNED, "amplitude_trim_db": gain_db, "lo_quadrature_error_deg": error_deg})
    truth = Bench(knobs, [1000.0], 48_000).truth()
    assert round(truth["predicted_sideband_suppression_db"][0], 1) == expected_db


@pytest.mark.parametrize(
    "gain_db, phase_trim_deg, lo_deg",
    [(0.35, 0.0, 0.0), (0.0, 1.2, 0.0), (-0.2, -0.7, 0.0), (0.1, 1.5, 0.4)],
)
def test_linear_ideal_truth_equals_the_relation(gain_db, phase_trim_deg, lo_deg):
    knobs = BenchKnobs(**{**ALIGNED, **FLAT_RX, "amplitude_trim_db": gain_db,
                          "phase_trim_deg": phase_trim_deg, "lo_quadrature_error_deg": lo_deg})
    truth = Bench(knobs, [1000.0], FLAT_RATE).truth()
    # Relation (Razavi) with the total error: LO error less the Q-path trim (network.quadrature_error_rad).
    expected = _relation(gain_db, lo_deg - phase_trim_deg)
    assert truth["exciter"]["sideband_suppression_db"][0] == pytest.approx(expected, abs=0.01)
    assert truth["points"][0]["sideband_suppression_db"] == pytest.approx(expected, abs=0.01)
    assert truth["predicted_sideband_suppression_db"][0] == pytest.approx(expected, abs=0.01)


def test_capture_suppression_includes_the_receiver_passband():
    knobs = BenchKnobs(**{**ALIGNED, "phase_trim_deg": 1.0, "rx_low_hz": 300.0, "rx_high_hz": 6000.0})
    truth = Bench(knobs, [1500.0], 48_000).truth()
    point = truth["points"][0]
    # scipy as reference for the passband: Butterworth high-pass + low-pass, order 2 each
    sos = np.vstack([signal.butter(2, 300.0, "highpass", fs=48_000, output="sos"),
                     signal.butter(2, 6000.0, "lowpass", fs=48_000, output="sos")])
    freqz_sos = getattr(signal, "freqz_sos", None) or signal.sosfreqz  # renamed in scipy 1.15
    _, h = freqz_sos(sos, worN=[point["wanted_hz"], point["unwanted_hz"]], fs=48_000)
    tilt = 20 * math.log10(abs(h[0]) / abs(h[1]))
    assert point["sideband_suppression_db"] == pytest.approx(_relation(0.0, -1.0) + tilt, abs=0.01)


def test_example_network_truth_agrees_with_prediction_when_linear():
    knobs = BenchKnobs(amplifier="linear")
    truth = Bench(knobs, [500.0, 1000.0, 2500.0], 48_000).truth()
    # the exact modulator output against the relation at each tone's own network error
    np.testing.assert_allclose(truth["exciter"]["sideband_suppression_db"],
                               truth["predicted_sideband_suppression_db"], atol=0.01)
    assert truth["twotone"] is None
    assert truth["exciter"]["carrier_suppression_db"] == pytest.approx(45.0, abs=1e-6)  # the knob's meaning


# --- two-tone ---------------------------------------------------------------------------------

def test_two_tone_pep_and_frequencies():
    knobs = BenchKnobs(**{**ALIGNED, **FLAT_RX, "carrier_offset_hz": 3000.0, "tuning_error_hz": 0.0})
    two = Bench(knobs, [700.0, 1900.0], FLAT_RATE).truth()["twotone"]
    low, high = two["tone_dbfs"]
    assert low == pytest.approx(high, abs=1e-4)
    # arithmetic: equal tones, PEP = 20·log10(2A) = tone + 6.02 dB; and PEP lands at capture_pep_dbfs
    assert two["pep_dbfs"] == pytest.approx(low + 20 * math.log10(2), abs=1e-3)
    assert two["pep_dbfs"] == pytest.approx(-6.0, abs=1e-3)
    # arithmetic: order 2k+1 at f_low - kD and f_high + kD, D = 1200 Hz; IMD9 lower = 3700 - 4800 < 0 folds
    assert two["tone_hz"] == [3700.0, 4900.0]
    assert [(p["order"], p["lower_hz"], p["upper_hz"]) for p in two["imd"]] == [
        (3, 2500.0, 6100.0), (5, 1300.0, 7300.0), (7, 100.0, 8500.0), (9, None, 9700.0)]
    assert two["imd"][3]["lower_dbfs"] is None and two["imd"][3]["worst_db_pep"] is not None


def test_two_tone_spectrum_inverted_receiver_swaps_sides():
    knobs = BenchKnobs(**{**ALIGNED, "wanted_side": "below", "carrier_offset_hz": 6000.0,
                          "tuning_error_hz": 0.0})
    truth = Bench(knobs, [700.0, 1900.0], 48_000).truth()
    # conventions: lower/upper are by capture frequency; tones land at 6000 - 1900 and 6000 - 700
    assert truth["twotone"]["tone_hz"] == [4100.0, 5300.0]
    imd3 = truth["twotone"]["imd"][0]
    assert (imd3["lower_hz"], imd3["upper_hz"]) == (2900.0, 6500.0)
    assert [p["wanted_hz"] for p in truth["points"]] == [5300.0, 4100.0]


def test_cubic_amplifier_imd3_matches_the_two_tone_result():
    a3, drive_db = -0.02, -6.0
    knobs = BenchKnobs(**{**ALIGNED, **FLAT_RX, "amplifier": "cubic", "cubic_a3": a3, "drive_db": drive_db})
    two = Bench(knobs, [700.0, 1900.0], FLAT_RATE).truth()["twotone"]
    amp = 0.5 * 10 ** (drive_db / 20)  # each tone at the amplifier input (PEP = drive)
    # standard two-tone result for y = a1·x + a3·x³:
    # IMD3 = (3/4)·a3·A³, fundamental a1·A + (9/4)·a3·A³
    expected_dbc = 20 * math.log10(0.75 * abs(a3) * amp**3 / (amp + 2.25 * a3 * amp**3))
    imd3 = two["imd"][0]
    assert imd3["lower_dbc"] == pytest.approx(expected_dbc, abs=0.01)
    assert imd3["upper_dbc"] == pytest.approx(expected_dbc, abs=0.01)
    assert two["imd"][1]["upper_dbc"] < -200  # a pure cubic makes no fifth-order products


def test_default_rig_imd_is_in_the_realistic_range():
    two = Bench(BenchKnobs(), [700.0, 1900.0], 48_000).truth()["twotone"]
    worst = [max(x for x in (p["lower_dbc"], p["upper_dbc"]) if x is not None) for p in two["imd"]]
    assert all(-62 < w < -24 for w in worst) and worst == sorted(worst, reverse=True)


# --- streaming and knobs ----------------------------------------------------------------------

@pytest.mark.parametrize("noise_dbfs", [-200.0, -100.0])
def test_render_is_phase_continuous_across_blocks(noise_dbfs):
    knobs = BenchKnobs(noise_dbfs=noise_dbfs, iq=True)
    tones = [700.0, 1900.0]
    whole = Bench(knobs, tones, 48_000, seed=3).render(3_333)
    split = Bench(knobs, tones, 48_000, seed=3)
    parts = np.concatenate([split.render(1_000), split.render(0), split.render(2_333)])
    assert np.array_equal(whole, parts)


def _bin_level(z: np.ndarray, rate: float, f: float) -> float:
    """Level of a complex tone at f over a whole number of its periods (rectangular DFT bin)."""
    n = np.arange(len(z))
    return 20 * math.log10(abs(np.mean(z * np.exp(-2j * np.pi * f * n / rate))))


def test_set_knobs_moves_the_unwanted_sideband():
    knobs = BenchKnobs(**{**ALIGNED, "iq": True, "adc": "float32", "noise_dbfs": -200.0,
                          "tuning_error_hz": 0.0})
    bench = Bench(knobs, [1000.0], 48_000)
    bench.render(4_800)  # let the receiver filter settle
    block = bench.render(4_800)  # 0.1 s: whole periods of 3, 4 and 5 kHz
    before = _bin_level(block[:, 0] + 1j * block[:, 1], 48_000, 3000.0)
    bench.set_knobs(knobs.with_changes(phase_trim_deg=2.0))
    bench.render(480)
    block = bench.render(4_800)
    z = block[:, 0] + 1j * block[:, 1]
    wanted, unwanted = _bin_level(z, 48_000, 5000.0), _bin_level(z, 48_000, 3000.0)
    truth = bench.truth()["points"][0]
    assert before < -120
    # relation (Razavi) for g = 1, ε = 2°: 35.2 dB; the render agrees with the truth
    assert wanted - unwanted == pytest.approx(_relation(0.0, 2.0), abs=0.02)
    assert unwanted == pytest.approx(truth["unwanted_dbfs"], abs=0.02)


def test_capture_matches_truth_levels():
    samples, truth = simulate_capture(BenchKnobs(adc="float32"), [1000.0], 0.5, 48_000)
    x = samples[:, 0]
    win = signal.windows.flattop(len(x), sym=False)  # scalloping < 0.01 dB (Heinzel et al. 2002)
    n = np.arange(len(x))
    for f, level in ((truth["points"][0]["wanted_hz"], truth["points"][0]["wanted_dbfs"]),
                     (truth["points"][0]["unwanted_hz"], truth["points"][0]["unwanted_dbfs"]),
                     (truth["carrier_hz"], truth["carrier_dbfs"])):
        c = np.sum(x * win * np.exp(-2j * np.pi * f * n / 48_000)) / np.sum(win)
        assert 20 * math.log10(2 * abs(c)) == pytest.approx(level, abs=0.02)


# --- sound card -------------------------------------------------------------------------------

def test_pushing_past_full_scale_clips():
    samples, _ = simulate_capture(BenchKnobs(capture_pep_dbfs=3.0), [1000.0], 0.05, 48_000)
    # pcm16 full scale: codes -32768 .. 32767
    assert samples.max() == 1.0 - 2.0**-15 and samples.min() == -1.0
    assert Capture(samples, 48_000, full_scale_lsb=2.0**-15).clipped == (True,)


def test_bad_knob_names_the_knob_and_range():
    with pytest.raises(BenchError, match=r"phase_trim_deg=45 is outside the allowed -30\.\.30"):
        BenchKnobs(phase_trim_deg=45.0)
    with pytest.raises(BenchError, match="adc='pcm8' is not one of"):
        BenchKnobs().with_changes(adc="pcm8")
    with pytest.raises(BenchError, match="beyond Nyquist"):
        Bench(BenchKnobs(carrier_offset_hz=23_000.0), [1000.0], 48_000)


# --- CLI --------------------------------------------------------------------------------------

EXPECTED_KEYS = {"model", "knobs", "sample_rate_hz", "iq", "tones_hz", "carrier_hz", "carrier_dbfs",
                 "wanted_side", "points", "carrier_suppression_db", "worst_sideband_suppression_db", "twotone",
                 "exciter", "noise_dbfs", "predicted_sideband_suppression_db"}


@pytest.fixture
def cli(capsys):
    from rtanalyzer.cli.cautions import show_first_run_notice
    from rtanalyzer.cli.main import main

    show_first_run_notice(io.StringIO())  # the once-per-user cautions are not what these tests read
    return main


def test_cli_writes_wav_and_truth(cli, tmp_path, capsys):
    out = tmp_path / "halyard.wav"
    rc = cli(["simulate", "--tones", "700", "1900", "--iq", "--adc", "pcm24", "--seconds", "0.25",
              "--rate", "44100", "--out", str(out)])
    assert rc == 0
    printed = capsys.readouterr()
    assert len(printed.out.strip().splitlines()) == 1 and str(out) in printed.out
    info = sf.info(str(out))
    assert (info.samplerate, info.channels, info.subtype, info.frames) == (44100, 2, "PCM_24", 11025)
    truth = json.loads(out.with_suffix(".json").read_text())
    assert set(truth) == EXPECTED_KEYS
    assert truth["iq"] is True and truth["twotone"]["imd"][0]["order"] == 3
    assert truth["knobs"]["adc"] == "pcm24" and truth["sample_rate_hz"] == 44100.0


def test_cli_bad_knob_is_one_line_and_exit_2(cli, tmp_path, capsys):
    rc = cli(["simulate", "--phase-trim-deg", "99", "--out", str(tmp_path / "x.wav")])
    err = capsys.readouterr().err
    assert rc == 2
    assert len(err.strip().splitlines()) == 1 and "phase_trim_deg" in err
    assert not (tmp_path / "x.wav").exists()
