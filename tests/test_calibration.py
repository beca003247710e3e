"""Calibration profiles: making them from synthetic captures, the file format, applying them, bad input."""

from __future__ import annotations

import json

import numpy as np
import pytest

from conftest import write_wav
from conftest import run_cli as cli
from rtanalyzer.cli.main import main
from rtanalyzer.errors import CaptureError, MeasurementError
from rtanalyzer.measurements.calibration import (
    CalibrationSet,
    Profile,
    make_channels_profile,
    make_passband_profile,
    parse_profile,
    write_profile,
)
from rtanalyzer.sources.capture import Signal

RATE = 48000
TONES = np.geomspace(250.0, 3500.0, 10).round()
GAIN_DB, PHASE_DEG, DELAY_S = 0.2, 0.5, 2e-6  # the injected right-input mismatch


@pytest.fixture(autouse=True)
def _setup(cautions_already_shown, tmp_path, monkeypatch):
    """Profiles go to a private folder; CLI calls run as a user who has seen the first-run notice."""
    monkeypatch.setenv("RTANALYZER_CALIBRATION_DIR", str(tmp_path / "cal"))


def mismatch(x, gain_db=GAIN_DB, phase_deg=PHASE_DEG, delay_s=DELAY_S):
    """The right input's response g*exp(j(phi0 - 2 pi f tau)) applied exactly in the frequency domain."""
    f = np.fft.rfftfreq(x.size, 1 / RATE)
    h = 10 ** (gain_db / 20) * np.exp(1j * (np.radians(phase_deg) - 2 * np.pi * f * delay_s))
    return np.fft.irfft(np.fft.rfft(x) * h, x.size)


def multitone(seconds=2.0, seed=0):
    t = np.arange(int(seconds * RATE)) / RATE
    phases = np.random.default_rng(seed).uniform(0, 2 * np.pi, TONES.size)
    return sum(0.08 * np.cos(2 * np.pi * f * t + p) for f, p in zip(TONES, phases))


def test_channel_mismatch_is_removed_to_target(tmp_path, capsys):
    # Target (the issue): an injected 0.5 degree / 0.2 dB mismatch is removed to within 0.02 degrees / 0.01 dB.
    x = multitone()
    write_wav(tmp_path / "same.wav", np.column_stack([x, mismatch(x)]))  # one source into both inputs
    code, out, err = cli(["calibrate", "channels", tmp_path / "same.wav", "--name", "card", "--json"], capsys)
    assert (code, err) == (0, "")
    prof = json.loads(out)
    assert prof["gain_db"] == pytest.approx(GAIN_DB, abs=1e-3)
    assert prof["phase_deg"] == pytest.approx(PHASE_DEG, abs=1e-3)
    assert prof["delay_s"] == pytest.approx(DELAY_S, abs=1e-8)
    # A network capture through the same card: Q lags I by 89 degrees, 0.1 dB low, then the card's mismatch.
    y = multitone(seed=5)
    q = np.fft.irfft(np.fft.rfft(y) * 10 ** (-0.1 / 20) * np.exp(-1j * np.radians(89.0)), y.size)
    write_wav(tmp_path / "net.wav", np.column_stack([y, mismatch(q)]))
    code, out, _ = cli(["analyze", "quadrature", tmp_path / "net.wav", "--json"], capsys)
    raw = json.loads(out)
    assert raw["calibration"] == []
    assert raw["points"][3]["phase_difference_deg"] == pytest.approx(89.0 - PHASE_DEG + 360 * TONES[3] * DELAY_S,
                                                                      abs=0.02)
    code, out, _ = cli(["analyze", "quadrature", tmp_path / "net.wav", "--json", "--calibration", "card"], capsys)
    fixed = json.loads(out)
    assert fixed["calibration"] == ["card"]
    assert [p["phase_difference_deg"] for p in fixed["points"]] == pytest.approx([89.0] * TONES.size, abs=0.02)
    assert [p["amplitude_ratio_db"] for p in fixed["points"]] == pytest.approx([-0.1] * TONES.size, abs=0.01)


def test_channels_profile_from_one_tone_puts_all_phase_in_phase_deg():
    t = np.arange(RATE) / RATE
    x = 0.5 * np.cos(2 * np.pi * 1000 * t)
    prof = make_channels_profile(Signal(x + 1j * mismatch(x), float(RATE)), "one")
    assert prof.values["delay_s"] == 0.0
    assert prof.values["phase_deg"] == pytest.approx(PHASE_DEG - 360 * 1000 * DELAY_S, abs=1e-3)


def test_antiphase_inputs_refused():
    x = multitone(1.0)
    with pytest.raises(MeasurementError, match="antiphase"):
        make_channels_profile(Signal(x - 1j * x, float(RATE)), "bad")


def test_profile_text_round_trip(tmp_path):
    p = Profile("passband", "rx", 48000.0, "2026-01-01T00:00:00", "card # 2", "pb.wav", {},
                ((300.0, -0.5), (1000.0, 0.1), (3000.0, 0.4)))
    again = parse_profile(p.text(), "mem")
    assert again == Profile("passband", "rx", 48000.0, "2026-01-01T00:00:00", "card", "pb.wav", {}, p.points)
    path = write_profile(p, tmp_path)
    with pytest.raises(CaptureError, match="--force"):
        write_profile(p, tmp_path)
    assert path.name == "rx.cal"


@pytest.mark.parametrize("text,match", [
    ("kind = channels\nname = a\nrate_hz = 48000\n", "lacks 'format"),
    ("format = rtanalyzer-calibration 1\nkind = phase\nname = a\nrate_hz = 48000\n", "kind 'phase'"),
    ("format = rtanalyzer-calibration 1\nkind = level\nname = a\nrate_hz = 48000\ngain_db = 1\n", "does not belong"),
    ("format = rtanalyzer-calibration 1\nkind = channels\nname = a\nrate_hz = 48000\nnonsense\n", ":5: expected"),
    ("format = rtanalyzer-calibration 1\nkind = passband\nname = a\nrate_hz = 48000\npoint = 500 0\n"
     "point = 500 1\n", "two 'point' lines give 500 Hz"),
    ("format = rtanalyzer-calibration 1\nkind = passband\nname = a\nrate_hz = 48000\npoint = 0 0\n"
     "point = 500 1\n", "positive frequency"),
    ("format = rtanalyzer-calibration 1\nkind = passband\nname = a\nrate_hz = 48000\npoint = 300 nan\n"
     "point = 500 1\n", "finite gain"),
])
def test_malformed_profiles(text, match):
    with pytest.raises(CaptureError, match=match):
        parse_profile(text, "p.cal")


def test_mismatched_sample_rate_is_a_clear_error(tmp_path, capsys):
    p = Profile("channels", "slow", 44100.0, values={"gain_db": 0.0, "phase_deg": 0.0, "delay_s": 0.0})
    write_profile(p)
    x = multitone(1.0)
    wav = write_wav(tmp_path / "net.wav", np.column_stack([x, x]))
    code, out, err = cli(["analyze", "quadrature", wav, "--calibration", "slow"], capsys)
    assert code == 2 and out == ""
    assert err.count("\n") == 1 and "44100 Hz" in err and "48000 Hz" in err
    with pytest.raises(CaptureError, match="made at 44100"):
        CalibrationSet.load(["slow"], 48000.0)


def test_channels_profile_refused_for_a_mono_view(tmp_path, capsys):
    write_profile(Profile("channels", "card", 48000.0, values={"gain_db": 0.0, "phase_deg": 0.0, "delay_s": 0.0}))
    wav = write_wav(tmp_path / "mono.wav", multitone(1.0))
    code, _, err = cli(["analyze", "sideband", wav, "--tone", 1000, "--calibration", "card"], capsys)
    assert code == 2 and "stereo" in err


def passband_db(f):
    """A receiver whose gain tilts 3 dB per decade (linear in log f, so the profile interpolates it exactly)."""
    return 3.0 * np.log10(np.asarray(f) / 1000.0)


def test_passband_correction_makes_sideband_pairs_compare_fairly(tmp_path, capsys):
    t = np.arange(2 * RATE) / RATE
    flat = [(f, 0.05) for f in (300, 500, 800, 1200, 2000, 2500, 3500)]
    ref = sum(a * 10 ** (passband_db(f) / 20) * np.cos(2 * np.pi * f * t + f) for f, a in flat)
    write_wav(tmp_path / "flat.wav", ref)
    code, out, err = cli(["calibrate", "passband", tmp_path / "flat.wav", "--name", "rx",
                          "--tones", *[f for f, _ in flat]], capsys)
    assert (code, err) == (0, ""), err
    # Carrier at 1500 Hz, tone 1000 Hz: wanted 2500 Hz, unwanted 500 Hz; the exciter's true suppression is 40 dB.
    wanted, unwanted = 0.3, 0.3 * 10 ** (-40 / 20)
    x = (wanted * 10 ** (passband_db(2500) / 20) * np.cos(2 * np.pi * 2500 * t)
         + unwanted * 10 ** (passband_db(500) / 20) * np.cos(2 * np.pi * 500 * t + 1.0)
         + 1e-4 * np.cos(2 * np.pi * 1500 * t))
    wav = write_wav(tmp_path / "sb.wav", x)
    argv = ["analyze", "sideband", wav, "--tone", 1000, "--carrier", 1500, "--wanted", "above", "--json"]
    code, out, _ = cli(argv, capsys)
    raw = json.loads(out)
    tilt = float(passband_db(2500) - passband_db(500))
    assert raw["points"][0]["sideband_suppression_db"] == pytest.approx(40.0 + tilt, abs=0.1)
    assert raw["calibration"] == []  # named in every result, empty when none applied
    code, out, _ = cli(argv + ["--calibration", "rx"], capsys)
    fixed = json.loads(out)
    assert fixed["calibration"] == ["rx"]
    assert fixed["points"][0]["sideband_suppression_db"] == pytest.approx(40.0, abs=0.1)
    assert fixed["worst_sideband_suppression_db"] == pytest.approx(40.0, abs=0.1)
    # The 1000 Hz tone lies in the default 300-3000 Hz band: its in-band worst follows the correction.
    assert raw["worst_in_band"]["sideband_suppression_db"] == pytest.approx(40.0 + tilt, abs=0.1)
    assert fixed["worst_in_band"] == {"tone_hz": 1000.0, "is_lower_bound": False,
                                      "sideband_suppression_db": fixed["points"][0]["sideband_suppression_db"]}


def test_level_calibration_adds_volts(tmp_path, capsys):
    # A 0.5 V RMS sine recorded at -10 dBFS: a 0 dBFS sine is 0.5 / 10**(-10/20) = 1.581 V RMS (AES17 dBFS).
    t = np.arange(RATE) / RATE
    ref = 10 ** (-10 / 20) * np.cos(2 * np.pi * 997 * t)
    write_wav(tmp_path / "ref.wav", ref)
    code, out, err = cli(["calibrate", "level", tmp_path / "ref.wav", "--volts-rms", 0.5, "--name", "lv", "--json"],
                         capsys)
    assert (code, err) == (0, "")
    assert json.loads(out)["channel_1_full_scale_vrms"] == pytest.approx(0.5 / 10 ** (-0.5), rel=1e-3)
    x = 0.2 * np.cos(2 * np.pi * 2500 * t) + 0.002 * np.cos(2 * np.pi * 500 * t)
    wav = write_wav(tmp_path / "sb.wav", x)
    code, out, _ = cli(["analyze", "sideband", wav, "--tone", 1000, "--carrier", 1500, "--wanted", "above",
                        "--json", "--calibration", "lv"], capsys)
    r = json.loads(out)
    p = r["points"][0]
    # A sine of peak 0.2 of full scale is 0.2 times the RMS volts of a 0 dBFS sine (AES17 dBFS); dBV re 1 V RMS.
    assert p["wanted_dbv"] == pytest.approx(20 * np.log10(0.2 * 0.5 / 10 ** (-0.5)), abs=0.02)
    assert r["calibration"] == ["lv"]
    code, _, err = cli(["calibrate", "level", tmp_path / "ref.wav", "--name", "lv2"], capsys)
    assert code == 2 and "--volts-rms" in err


def test_channels_profile_applies_to_iq_sideband(tmp_path, capsys):
    write_profile(Profile("channels", "card", 48000.0, values={"gain_db": 0.0, "phase_deg": 0.0, "delay_s": 0.0}))
    t = np.arange(RATE) / RATE
    z = 0.3 * np.exp(2j * np.pi * 5000 * t) + 0.003 * np.exp(2j * np.pi * 3000 * t)
    wav = write_wav(tmp_path / "iq.wav", np.column_stack([z.real, z.imag]))
    code, out, err = cli(["analyze", "sideband", wav, "--iq", "--tone", 1000, "--carrier", 4000, "--json",
                          "--calibration", "card"], capsys)
    assert (code, err) == (0, "")
    r = json.loads(out)
    assert r["calibration"] == ["card"]
    assert r["points"][0]["sideband_suppression_db"] == pytest.approx(40.0, abs=0.1)


def tilt_db(f):
    """A receiver tilting 12 dB per decade, linear in log f so the profile interpolates it exactly."""
    return 12.0 * np.log10(np.asarray(f, dtype=float) / 1000.0)


def test_passband_correction_brings_twotone_figures_to_the_untilted_truth(tmp_path, capsys):
    from conftest import amplitude, sigma_for_bin_level
    from rtanalyzer.measurements.calibration import make_passband_profile

    t = np.arange(2 * RATE) / RATE
    noise = sigma_for_bin_level(-150.0, 65536)  # far under the products: sub-0.05 dB reading error
    rng = np.random.default_rng(7)
    # Profile: a flat multitone through the tilted receiver.
    flat = sum(0.03 * amplitude(tilt_db(f)) * np.cos(2 * np.pi * f * t + 0.6 * k * k)
               for k, f in enumerate(range(500, 4001, 250)))
    profile = make_passband_profile(Signal(flat, float(RATE)), "rx", tuple(range(500, 4001, 250)))
    write_profile(profile)
    # Truth: tones 2000 Hz at -10 dBFS and 2300 Hz at -10.5 dBFS (the low one is the stronger); the tilt
    # makes the high one read stronger, so the dBc reference must switch back after correction.
    truth_tones = {2000.0: -10.0, 2300.0: -10.5}
    # dBc re the stronger true tone (-10 dBFS); the IMD9 upper product (3500 Hz) is not injected: a bound.
    truth_dbc = {1700.0: -30.0, 2600.0: -32.0, 1400.0: -45.0, 2900.0: -47.0, 1100.0: -60.0, 3200.0: -62.0,
                 800.0: -75.0}
    comps = [(f, level) for f, level in truth_tones.items()] + [(f, -10.0 + d) for f, d in truth_dbc.items()]
    x = sum(amplitude(level + tilt_db(f)) * np.cos(2 * np.pi * f * t + 0.3 * k) for k, (f, level) in enumerate(comps))
    wav = write_wav(tmp_path / "tt.wav", x + noise * rng.standard_normal(t.size))
    argv = ["analyze", "twotone", wav, "--tones", 2000, 2300, "--json"]
    code, out, err = cli(argv, capsys)
    assert (code, err) == (0, ""), err
    raw = json.loads(out)
    code, out, err = cli(argv + ["--calibration", "rx"], capsys)
    assert (code, err) == (0, ""), err
    fixed = json.loads(out)
    assert fixed["calibration"] == ["rx"] and not any("passband" in w for w in fixed["warnings"])
    # PEP of two tones = 20*log10(A1 + A2) of their peak amplitudes (measurement-conventions.md, "Two-tone test").
    pep_truth = 20 * np.log10(amplitude(-10.0) + amplitude(-10.5))
    assert fixed["pep_dbfs"] - max(fixed["tone_dbfs"]) == pytest.approx(pep_truth + 10.0, abs=0.05)
    assert fixed["tone_dbfs"][0] - fixed["tone_dbfs"][1] == pytest.approx(0.5, abs=0.05)
    moved = 0.0
    for o_raw, o in zip(raw["imd"], fixed["imd"]):
        for side in ("lower", "upper"):
            f = o[f"{side}_hz"]
            if o[f"{side}_detected"]:
                d = truth_dbc[round(f)]
                # dBc = product - stronger tone; dB PEP = product - PEP (measurement-conventions.md).
                assert o[f"{side}_dbc"] == pytest.approx(d, abs=0.05), (o["order"], side)
                assert o[f"{side}_db_pep"] == pytest.approx(-10.0 + d - pep_truth, abs=0.05), (o["order"], side)
                moved = max(moved, abs(o_raw[f"{side}_dbc"] - d))
            # What the correction did to the dBc is kept beside it.
            assert o[f"{side}_passband_correction_db"] == pytest.approx(o[f"{side}_dbc"] - o_raw[f"{side}_dbc"],
                                                                        abs=0.002)
    assert moved > 2.0  # uncorrected, the tilt is plainly in the figures
    # The IMD9 upper product stays a bound, moved by the receiver's gain there and the reference's.
    o9_raw, o9 = raw["imd"][-1], fixed["imd"][-1]
    assert o9["upper_detected"] is False and o9["upper_dbfs"] is None
    # Its corrected level over the corrected low tone (the stronger); the profile's mean offset cancels.
    bound_raw = o9_raw["upper_dbc"] + max(raw["tone_dbfs"])
    expected = bound_raw - float(tilt_db(3500.0)) - (raw["tone_dbfs"][0] - float(tilt_db(2000.0)))
    assert o9["upper_dbc"] == pytest.approx(expected, abs=0.05)
    # Worst IMD: truth says IMD3 lower (-30 dBc) beats upper (-32); the tilt had it the other way.
    assert fixed["worst_imd_order"] == 3 and fixed["worst_imd_is_bound"] is False
    assert fixed["worst_imd_db_pep"] == pytest.approx(-40.0 - pep_truth, abs=0.05)
    assert fixed["imd"][0]["worst_db_pep"] == pytest.approx(fixed["imd"][0]["lower_db_pep"], abs=1e-9)
    assert raw["imd"][0]["worst_db_pep"] == pytest.approx(raw["imd"][0]["upper_db_pep"], abs=1e-9)


def test_passband_points_outside_the_profile_warn_and_other_measurements_refuse():
    profile = Profile("passband", "narrow", 48000.0, points=((1000.0, -1.0), (3000.0, 1.0)))
    figures = {"measurement": "twotone", "tone_hz": [2000.0, 2300.0], "tone_dbfs": [-10.0, -10.0], "pep_dbfs": -3.98,
               "imd": [{"order": 3, "lower_hz": 800.0, "lower_dbfs": -50.0, "lower_dbc": -40.0, "lower_db_pep": -46.02,
                        "lower_detected": True, "upper_hz": None, "upper_dbfs": None, "upper_dbc": None,
                        "upper_db_pep": None, "upper_detected": False, "worst_db_pep": -46.02,
                        "worst_is_bound": False}],
               "warnings": []}
    signal = Signal(np.zeros(8), 48000.0)
    out = CalibrationSet((profile,)).finish(figures, signal)
    # Outside the points the nearest end's gain (-1 dB at 1000 Hz) is held, and a warning says so.
    assert out["imd"][0]["lower_dbfs"] == pytest.approx(-49.0, abs=1e-9)
    assert out["imd"][0]["upper_passband_correction_db"] is None  # a product not measured stays null
    assert any("'narrow'" in w and "800" in w for w in out["warnings"])
    with pytest.raises(MeasurementError, match="not to quadrature"):
        CalibrationSet((profile,)).finish({"measurement": "quadrature", "warnings": []}, signal)


@pytest.mark.parametrize("reference", ["sweep", "multitone"])
def test_passband_profile_from_a_sweep_or_multitone_follows_the_filter(reference):
    # The receiver is a 4th-order Butterworth band-pass; its gain at each tone, relative to the
    # mean over the tones, is the oracle (scipy.signal.sosfreqz, the reference implementation).
    from scipy import signal as sps

    from rtanalyzer.generator.generator import Generator
    from rtanalyzer.generator.signals import Multitone, Sweep

    rate = 48000.0
    sos = sps.butter(4, (400.0, 2600.0), "bandpass", fs=rate, output="sos")
    if reference == "sweep":
        sig = Sweep.log_range(300.0, 3400.0, 10, -6.0, dwell_s=0.4, settle_s=0.1)
        freqs = np.array(sig.frequencies_hz)
        x = Generator(sig, rate).render(int(len(freqs) * 0.4 * rate))[:, 0]
    else:
        sig = Multitone.spread(300.0, 3400.0, 10, -6.0)
        freqs = np.array(sig.frequencies_hz)
        x = Generator(sig, rate).render(int(3 * rate))[:, 0]
    y = sps.sosfilt(sos, x)
    profile = make_passband_profile(Signal(y, rate), "rx", tuple(freqs))
    _, h = sps.sosfreqz(sos, worN=freqs, fs=rate)
    expected = 20 * np.log10(np.abs(h))
    expected -= expected.mean()
    got = np.array([g for _, g in profile.points])
    assert [f for f, _ in profile.points] == pytest.approx(list(freqs), abs=0.05)
    # 0.05 dB: the filter's start-up at each step is left out by the settle time; what remains
    # is the tone estimate's own spread at these levels.
    assert np.max(np.abs(got - expected)) < 0.05


def test_passband_gain_between_sparse_points_follows_a_receiver_skirt():
    # Points a sixth of an octave apart on a 4th-order Butterworth band-pass (scipy.signal.sosfreqz
    # is the reference): halfway between points the gain read from the profile stays within
    # 0.05 dB of the filter on its skirt, where straight lines in log frequency miss by 0.14 dB.
    from scipy import signal as sps

    from rtanalyzer.measurements.calibration import passband_gain_db

    rate = 48000.0
    sos = sps.butter(4, (400.0, 6000.0), "bandpass", fs=rate, output="sos")
    grid = 300.0 * 2 ** (np.arange(0, 25) / 6)
    _, h = sps.sosfreqz(sos, worN=grid, fs=rate)
    profile = Profile("passband", "rx", rate, points=tuple(zip(grid, 20 * np.log10(np.abs(h)))))
    mids = np.sqrt(grid[:-1] * grid[1:])
    _, hm = sps.sosfreqz(sos, worN=mids, fs=rate)
    got = np.array([passband_gain_db(profile, f)[0] for f in mids])
    assert np.max(np.abs(got - 20 * np.log10(np.abs(hm)))) < 0.05


def test_a_one_sample_skew_between_the_inputs_is_calibrated_out():
    # The right input one sample late (20.8 µs at 48 kHz: 22.5° at 3 kHz): the profile measures
    # that delay (arithmetic: 1/48000 s) and the corrected analysis reads the pair as identical.
    rate = 48000.0
    t = np.arange(int(2 * rate)) / rate
    freqs = (300.0, 700.0, 1500.0, 3000.0)
    x = sum(0.1 * np.cos(2 * np.pi * f * t + k) for k, f in enumerate(freqs))
    skewed = Signal(x + 1j * np.roll(x, 1), rate)
    prof = make_channels_profile(skewed, "desk1")
    assert prof.values["delay_s"] == pytest.approx(1 / rate, rel=1e-3)
    assert abs(prof.values["phase_deg"]) < 0.01 and abs(prof.values["gain_db"]) < 0.001


def test_two_unrelated_signals_are_refused_with_the_reason():
    rate = 48000.0
    t = np.arange(int(rate)) / rate
    left = sum(0.1 * np.cos(2 * np.pi * f * t) for f in (300.0, 1000.0, 2500.0))
    right = sum(0.1 * np.cos(2 * np.pi * f * t + p) for f, p in ((300.0, 2.0), (1000.0, -1.0), (2500.0, 0.5)))
    with pytest.raises(MeasurementError, match="one signal fed to both inputs"):
        make_channels_profile(Signal(left + 1j * right, rate), "x")


def test_the_text_output_names_the_calibration_applied(tmp_path, capsys, monkeypatch):
    # A level profile applied to analyze sideband: the text says so and where the volts are.
    monkeypatch.setenv("RTANALYZER_CALIBRATION_DIR", str(tmp_path / "cal"))
    rate = 48000
    t = np.arange(2 * rate) / rate
    x = 0.5 * np.cos(2 * np.pi * 5000 * t) + 0.005 * np.cos(2 * np.pi * 3000 * t)
    write_profile(Profile("level", "lvl", float(rate), values={"channel_1_full_scale_vrms": 1.0}))
    write_wav(tmp_path / "sb.wav", x, rate)
    code = main(["analyze", "sideband", str(tmp_path / "sb.wav"), "--tone", "1000", "--carrier", "4000",
                 "--calibration", "lvl"])
    out = capsys.readouterr().out
    assert code == 0 and "calibration applied: lvl (levels in dBV" in out


def test_passband_corrects_a_twotones_carrier_and_unwanted_sidebands():
    # Every level less the receiver's gain at its own frequency (points placed exactly there, so no
    # interpolation enters): carrier dBc re the stronger corrected tone, each unwanted sideband re
    # its own corrected tone (arithmetic of the definitions in measurement-conventions.md).
    gains = {2107.3: -3.0, 3307.3: -2.0, 4007.3: -1.0, 4707.3: 0.5, 5907.3: 1.5}
    profile = Profile("passband", "rx", 48000.0, points=tuple(sorted(gains.items())))
    figures = {"measurement": "twotone", "tone_hz": [4707.3, 5907.3], "tone_dbfs": [-14.0, -13.0], "pep_dbfs": -7.46,
               "imd": [], "carrier_hz": 4007.3, "carrier_dbfs": -60.0, "carrier_detected": True,
               "carrier_suppression_db": 47.0,
               "unwanted": [{"tone_hz": 700.0, "unwanted_hz": 3307.3, "unwanted_dbfs": -46.0, "unwanted_detected": True,
                             "sideband_suppression_db": 32.0},
                            {"tone_hz": 1900.0, "unwanted_hz": 2107.3, "unwanted_dbfs": -47.0,
                             "unwanted_detected": True, "sideband_suppression_db": 34.0}],
               "warnings": []}
    out = CalibrationSet((profile,)).finish(figures, Signal(np.zeros(8), 48000.0))
    tones = [-14.0 - 0.5, -13.0 - 1.5]  # -14.5, -14.5
    assert out["tone_dbfs"] == pytest.approx(tones)
    assert out["carrier_dbfs"] == pytest.approx(-59.0)
    assert out["carrier_suppression_db"] == pytest.approx(max(tones) - (-59.0))
    assert out["unwanted"][0]["unwanted_dbfs"] == pytest.approx(-44.0)
    assert out["unwanted"][0]["sideband_suppression_db"] == pytest.approx(tones[0] - (-44.0))
    assert out["unwanted"][1]["sideband_suppression_db"] == pytest.approx(tones[1] - (-44.0))
