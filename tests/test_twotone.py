"""Two-tone intermodulation: tone levels, PEP, products in dBc and dB PEP, folding and clipping.

Definitions (measurement-conventions.md): odd-order products of order 2k+1 land at
f_low - k*D and f_high + k*D, D = f_high - f_low (arithmetic); PEP of two tones of peak A1, A2
is 20*log10(A1 + A2) dBFS, so equal tones give PEP = tone + 20*log10(2) = tone + 6.02 dB
(arithmetic); dBc = product - stronger tone; dB PEP = product - PEP (equal tones: dBc - 6.02).
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from conftest import capture_of, sigma_for_bin_level, synth
from rtanalyzer.errors import PlanError
from rtanalyzer.measurements.twotone import TwoToneMeasurement

RATE = 48000
NFFT = 32768
NOISE_DB = -115.0  # per ~1.5 Hz bin: a good 24-bit card (common practice, no source)
NOISE = sigma_for_bin_level(NOISE_DB, NFFT)
SIX_DB = 20 * np.log10(2.0)  # arithmetic: 6.0206 dB

TOP_KEYS = {"measurement", "tone_hz", "tone_dbfs", "pep_dbfs", "imd", "noise_floor_dbfs",
            "analysis_bandwidth_hz", "clipped", "warnings"}
SIDE_KEYS = {"{}_hz", "{}_dbfs", "{}_dbc", "{}_db_pep", "{}_detected"}


def measure(samples, settings, rate=RATE, **view):
    out = TwoToneMeasurement().measure(capture_of(samples, rate).view(**view), settings).to_json()
    json.dumps(out, allow_nan=False)
    assert TOP_KEYS <= out.keys()
    for o in out["imd"]:
        for side in ("lower", "upper"):
            assert {k.format(side) for k in SIDE_KEYS} <= o.keys()
        assert "worst_db_pep" in o
    assert [o["order"] for o in out["imd"]] == [3, 5, 7, 9]
    return out


def order(r, n):
    return next(o for o in r["imd"] if o["order"] == n)


def test_equal_tones_pep_and_db_pep():
    # 1000 and 1200 Hz at -12 dBFS each, IMD3 injected at -40 dBc on both sides.
    f1, f2, tone = 1000.0, 1200.0, -12.0
    comps = [(f1, tone, 0.1), (f2, tone, 0.9), (800.0, tone - 40.0, 0.3), (1400.0, tone - 40.0, 2.0)]
    r = measure(synth(comps, RATE, 1.0, NOISE, 1), {"tones": [f1, f2]})
    assert r["tone_hz"] == pytest.approx([f1, f2], abs=0.05)
    assert r["tone_dbfs"] == pytest.approx([tone, tone], abs=0.05)
    assert r["pep_dbfs"] == pytest.approx(tone + SIX_DB, abs=0.05)
    imd3 = order(r, 3)
    for side in ("lower", "upper"):
        assert imd3[f"{side}_dbc"] == pytest.approx(-40.0, abs=0.2)
        assert imd3[f"{side}_db_pep"] == pytest.approx(imd3[f"{side}_dbc"] - SIX_DB, abs=0.01)
    assert imd3["lower_hz"] == pytest.approx(800.0, abs=0.05)
    assert imd3["upper_hz"] == pytest.approx(1400.0, abs=0.05)


def test_unequal_tones_pep_is_the_sum_of_amplitudes():
    # PEP = 20*log10(A1 + A2) (conventions); dBc relative to the stronger tone.
    a1, a2 = -10.0, -16.0
    comps = [(1000.0, a1, 0.0), (1200.0, a2, 1.0), (1400.0, a1 - 50.0, 0.5)]
    r = measure(synth(comps, RATE, 1.0, NOISE, 2), {"tones": [1000.0, 1200.0]})
    expected_pep = 20 * np.log10(10 ** (a1 / 20) + 10 ** (a2 / 20))
    assert r["pep_dbfs"] == pytest.approx(expected_pep, abs=0.05)
    assert order(r, 3)["upper_dbc"] == pytest.approx(-50.0, abs=0.2)
    assert order(r, 3)["upper_db_pep"] == pytest.approx(a1 - 50.0 - expected_pep, abs=0.2)
    assert any("differ" in w for w in r["warnings"])


@settings(max_examples=30, deadline=None)
@given(
    dbc=st.lists(st.floats(-70.0, -30.0), min_size=8, max_size=8),
    phases=st.lists(st.floats(0.0, 2 * np.pi), min_size=10, max_size=10),
    seed=st.integers(0, 2**31 - 1),
)
def test_injected_products_are_recovered(dbc, phases, seed):
    # Products at -30...-70 dBc of -12 dBFS tones (the weakest at -82 dBFS, 33 dB above the noise
    # per bin) recovered within 0.5 dB, each at its planned place.
    f1, f2, tone = 3000.0, 3300.0, -12.0
    d = f2 - f1
    places = [f for k in range(1, 5) for f in (f1 - k * d, f2 + k * d)]
    comps = [(f1, tone, phases[0]), (f2, tone, phases[1])]
    comps += [(f, tone + level, ph) for f, level, ph in zip(places, dbc, phases[2:])]
    r = measure(synth(comps, RATE, 1.0, NOISE, seed), {"tones": [f2, f1]})
    for i, n in enumerate((3, 5, 7, 9)):
        o = order(r, n)
        for j, side in enumerate(("lower", "upper")):
            expected = dbc[2 * i + j]
            assert o[f"{side}_detected"] is True
            assert o[f"{side}_hz"] == pytest.approx(places[2 * i + j], abs=0.1)
            assert o[f"{side}_dbc"] == pytest.approx(expected, abs=0.5)
        worst = max(o["lower_db_pep"], o["upper_db_pep"])
        assert o["worst_db_pep"] == pytest.approx(worst, abs=1e-6)
    worst_all = max(order(r, n)["worst_db_pep"] for n in (3, 5, 7, 9))
    assert r["worst_imd_db_pep"] == pytest.approx(worst_all, abs=1e-6)


@pytest.mark.parametrize("a3", [-0.2, 0.2])
def test_cubic_nonlinearity_gives_the_textbook_imd3(a3):
    # y = x + a3*x**3 with x = A cos w1 t + A cos w2 t. Standard two-tone result (any RF text on
    # IP3, e.g. Razavi, RF Microelectronics, chapter on nonlinearity; from memory): each IMD3
    # product has amplitude (3/4)*a3*A**3 and each fundamental becomes A + (9/4)*a3*A**3.
    # The cubic makes no 5th or higher-order products, and its 3rd harmonics / 2f1+f2
    # (3000..3600 Hz) miss every place measured here (200..2000 Hz).
    A = 0.25
    f1, f2 = 1000.0, 1200.0
    t = np.arange(RATE) / RATE
    x = A * np.cos(2 * np.pi * f1 * t + 0.3) + A * np.cos(2 * np.pi * f2 * t + 1.1)
    y = x + a3 * x**3 + NOISE * np.random.default_rng(3).standard_normal(len(t))
    r = measure(y, {"tones": [f1, f2]})
    fundamental = A + 2.25 * a3 * A**3
    expected_tone_db = 20 * np.log10(abs(fundamental))
    expected_dbc = 20 * np.log10(abs(0.75 * a3 * A**3 / fundamental))
    assert -42.0 < expected_dbc < -39.0  # the brief: around -40 dBc
    assert r["tone_dbfs"] == pytest.approx([expected_tone_db] * 2, abs=0.02)
    imd3 = order(r, 3)
    assert imd3["lower_dbc"] == pytest.approx(expected_dbc, abs=0.1)
    assert imd3["upper_dbc"] == pytest.approx(expected_dbc, abs=0.1)
    for n in (5, 7, 9):
        o = order(r, n)
        assert o["lower_detected"] is False and o["upper_detected"] is False
        assert o["lower_dbfs"] is None and o["upper_dbfs"] is None
        assert o["worst_is_bound"] is True
    assert r["worst_imd_order"] == 3


def test_products_below_zero_hz_are_null_with_a_warning():
    # 700 and 1900 Hz straight into a real capture: D = 1200 Hz, so every lower product
    # (700 - k*1200 Hz) lies below 0 Hz and would fold (conventions: null with a warning).
    comps = [(700.0, -12.0, 0.3), (1900.0, -12.0, 1.0), (3100.0, -50.0, 0.2)]
    r = measure(synth(comps, RATE, 1.0, NOISE, 4), {"tones": [700.0, 1900.0]})
    for n in (3, 5, 7, 9):
        o = order(r, n)
        assert o["lower_hz"] is None and o["lower_dbfs"] is None
        assert o["lower_dbc"] is None and o["lower_db_pep"] is None
        assert o["lower_detected"] is False
        assert any(f"IMD{n} lower" in w for w in r["warnings"])
    assert order(r, 3)["upper_dbc"] == pytest.approx(-38.0, abs=0.2)
    assert order(r, 3)["worst_db_pep"] == pytest.approx(-38.0 - SIX_DB, abs=0.2)


def test_products_beyond_nyquist_are_null_with_a_warning():
    # 8 kHz capture, tones 2800/3300 Hz: IMD7 upper at 4800 Hz and IMD9 upper at 5300 Hz pass
    # the 4000 Hz Nyquist frequency (arithmetic).
    rate, nfft = 8000, 8192
    comps = [(2800.0, -12.0, 0.3), (3300.0, -12.0, 1.0), (2300.0, -50.0, 0.0)]
    r = measure(synth(comps, rate, 1.5, sigma_for_bin_level(NOISE_DB, nfft), 5), {"tones": [2800.0, 3300.0]}, rate=rate)
    for n in (7, 9):
        assert order(r, n)["upper_hz"] is None
        assert any(f"IMD{n} upper" in w for w in r["warnings"])
    assert order(r, 3)["lower_dbc"] == pytest.approx(-38.0, abs=0.2)


def test_with_carrier_and_wanted_below():
    # Carrier at 4000 Hz, wanted below: the 700/1900 Hz tones land at 3300 and 2100 Hz.
    # lower/upper mean lower/higher audio frequency in the capture (conventions).
    comps = [(3300.0, -12.0, 0.3), (2100.0, -12.0, 1.0), (900.0, -47.0, 0.0), (4500.0, -52.0, 0.4)]
    r = measure(synth(comps, RATE, 1.0, NOISE, 6), {"tones": [700.0, 1900.0], "carrier": 4000.0, "wanted": "below"})
    assert r["tone_hz"] == pytest.approx([2100.0, 3300.0], abs=0.05)
    imd3 = order(r, 3)
    assert imd3["lower_hz"] == pytest.approx(900.0, abs=0.1)
    assert imd3["lower_dbc"] == pytest.approx(-35.0, abs=0.2)
    assert imd3["upper_dbc"] == pytest.approx(-40.0, abs=0.2)
    assert imd3["worst_db_pep"] == pytest.approx(-35.0 - SIX_DB, abs=0.2)


def test_iq_capture_measures_products_at_negative_frequency():
    # I/Q: tones at -300 and +900 Hz (carrier 0 region); IMD3 at -1500 and +2100 Hz are legal.
    comps = [(-300.0, -12.0, 0.3), (900.0, -12.0, 1.0), (-1500.0, -57.0, 0.0), (2100.0, -52.0, 0.4)]
    x = synth(comps, RATE, 1.0, sigma_for_bin_level(NOISE_DB, NFFT, iq=True), 7, iq=True)
    r = measure(x, {"tones": [300.0, 1500.0]}, iq=True)
    assert r["tone_dbfs"] == pytest.approx([-12.0, -12.0], abs=0.05)
    imd3 = order(r, 3)
    assert imd3["lower_hz"] == pytest.approx(-1500.0, abs=0.1)
    assert imd3["lower_dbc"] == pytest.approx(-45.0, abs=0.2)
    assert imd3["upper_dbc"] == pytest.approx(-40.0, abs=0.2)


def test_clipped_capture_is_flagged_with_a_warning():
    x = np.clip(synth([(1000.0, -4.0, 0.3), (1200.0, -4.0, 1.0)], RATE, 1.0, NOISE, 8), -1.0, 1.0)
    r = measure(x, {"tones": [1000.0, 1200.0]})
    assert r["clipped"] is True
    assert any("clip" in w.lower() for w in r["warnings"])


def test_no_partner_tone_is_a_plan_error():
    x = synth([(1000.0, -6.0, 0.3)], RATE, 1.0, NOISE, 9)
    with pytest.raises(PlanError) as info:
        TwoToneMeasurement().measure(capture_of(x).view(), {"tones": [1000.0, 1200.0]})
    assert "\n" not in str(info.value)


def test_a_wrong_tone_names_what_the_capture_holds():
    # Tones at 700 and 1900 Hz above a 4000 Hz carrier; asked for 700 and 2000 Hz, the error says
    # where the strongest peaks really are, so the builder can correct --tones.
    from rtanalyzer.errors import PlanError
    from rtanalyzer.measurements.twotone import TwoToneMeasurement
    from rtanalyzer.sources.capture import Signal

    t = np.arange(96000) / 48000
    x = 0.25 * np.cos(2 * np.pi * 4700 * t) + 0.25 * np.cos(2 * np.pi * 5900 * t)
    with pytest.raises(PlanError, match=r"check --tones.*strongest peaks: (4700\.0|5900\.0) Hz"):
        TwoToneMeasurement().measure(Signal(x, 48000.0), {"tones": [700.0, 2000.0], "carrier": 4000.0})


def test_with_the_carrier_given_the_carrier_and_unwanted_sidebands_are_measured_too():
    # Against the simulated bench's exact truth (sources/bench/truth.py): carrier dBc and each
    # tone's opposite-sideband suppression, to the accuracy of the steady analysis (0.01 dB here,
    # a clean 2 s capture; scripts/accuracy.py reports thousandths).
    from rtanalyzer.sources.bench import simulate_capture
    from rtanalyzer.sources.bench.knobs import BenchKnobs
    from rtanalyzer.sources.capture import Signal

    samples, truth = simulate_capture(BenchKnobs(), (700.0, 1900.0), 2.0, 48000.0)
    r = TwoToneMeasurement().measure(Signal(samples[:, 0], 48000.0), {"tones": [700.0, 1900.0], "carrier": 4000.0})
    out = r.to_json()
    assert out["carrier_suppression_db"] == pytest.approx(truth["carrier_suppression_db"], abs=0.01)
    assert [u["sideband_suppression_db"] for u in out["unwanted"]] == pytest.approx(
        [p["sideband_suppression_db"] for p in truth["points"]], abs=0.01)
    # Without the carrier nothing is said of them (the pair is found on its own).
    bare = TwoToneMeasurement().measure(Signal(samples[:, 0], 48000.0), {"tones": [700.0, 1900.0]}).to_json()
    assert bare["carrier_suppression_db"] is None and bare["unwanted"] == []
