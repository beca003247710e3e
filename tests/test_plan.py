"""The frequency plan: where carrier, wanted and unwanted land, and locking onto a capture.

The plan follows the project's conventions (measurement-conventions.md, "Frequency plan of a
capture"): wanted = carrier + side*tone, unwanted = carrier - side*tone (arithmetic); in a real
capture a component below 0 Hz folds onto |f| (sampling theorem: a real signal's spectrum is
symmetric), so such a plan is an error; so is one that passes Nyquist or puts two components
closer than the analysis resolution.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from conftest import sigma_for_bin_level, synth
from rtanalyzer.dsp.spectrum import averaged_spectrum
from rtanalyzer.errors import PlanError, RtaError
from rtanalyzer.measurements.plan import Lock, PlanRequest, lock

RATE = 48000
NFFT = 32768  # what a 1 s capture at 48 kHz gets (bins of 1.46 Hz)
# Noise 110 dB below full scale per bin: a quiet 24-bit card in ~1.5 Hz bins (common practice,
# no source); every test tone below stands at least 40 dB above it.
NOISE = sigma_for_bin_level(-110.0, NFFT)


def spectrum_of(components, rate=RATE, seconds=1.0, noise=NOISE, seed=0, iq=False):
    x = synth(components, rate, seconds, noise_rms=noise, seed=seed, iq=iq)
    return averaged_spectrum(x[:, 0] + 1j * x[:, 1] if iq else x, rate)


def one_line_plan_error(spectrum, request) -> str:
    with pytest.raises(PlanError) as info:
        lock(spectrum, request)
    message = str(info.value)
    assert message and "\n" not in message
    assert isinstance(info.value, RtaError)
    return message


def test_lock_geometry():
    # Arithmetic of the plan (conventions): wanted - carrier = carrier - unwanted = tone.
    above = Lock(4000.0, +1, (1000.0, 1500.0), 0.0)
    below = Lock(4000.0, -1, (1000.0,), 0.0)
    assert above.wanted_hz(1000.0) == 5000.0 and above.unwanted_hz(1000.0) == 3000.0
    assert below.wanted_hz(1000.0) == 3000.0 and below.unwanted_hz(1000.0) == 5000.0
    assert above.wanted_side == "above" and below.wanted_side == "below"
    assert sorted(above.positions().values()) == [2500.0, 3000.0, 4000.0, 5000.0, 5500.0]


@pytest.mark.parametrize("wanted", ["above", "auto"])
def test_unwanted_below_zero_folds_in_a_real_capture(wanted):
    # Carrier 1500 Hz, tone 2000 Hz: wanted at 3500 Hz, unwanted at -500 Hz, which a real
    # capture folds onto +500 Hz (conventions).
    s = spectrum_of([(3500.0, -6.0, 0.2), (1500.0, -50.0, 0.0)])
    message = one_line_plan_error(s, PlanRequest((2000.0,), 1500.0, wanted))
    assert "fold" in message
    assert "-500" in message


def test_the_same_plan_is_fine_in_an_iq_capture():
    # An I/Q capture keeps negative frequencies apart (conventions): nothing folds.
    s = spectrum_of([(3500.0, -6.0, 0.2), (-500.0, -40.0, 1.0)], iq=True)
    found = lock(s, PlanRequest((2000.0,), 1500.0, "above"))
    assert found.unwanted_hz(2000.0) == pytest.approx(-500.0, abs=0.05)


def test_component_beyond_nyquist_is_an_error():
    # Carrier 23000 Hz + tone 2000 Hz = 25000 Hz > 24000 Hz Nyquist at 48 kHz (arithmetic).
    s = spectrum_of([(21000.0, -6.0, 0.0)])
    message = one_line_plan_error(s, PlanRequest((2000.0,), 23000.0, "below"))
    assert "Nyquist" in message


def test_components_closer_than_the_resolution_collide():
    # Tones 1000 and 1005 Hz put two wanted components 5 Hz apart: inside one main lobe
    # (+/-4 bins of 1.46 Hz, Heinzel et al. 2002, from memory), so not separable.
    s = spectrum_of([(2500.0, -6.0, 0.0), (2505.0, -6.0, 1.0)])
    message = one_line_plan_error(s, PlanRequest((1000.0, 1005.0), 1500.0, "above"))
    assert "collide" in message


def test_unwanted_on_dc_of_a_real_capture_is_an_error():
    # With the plan's exact spacing the only clashes between different components are near-equal
    # tones (above) and, in a real capture, a component on DC: carrier offset 1000 Hz and tone
    # 1000 Hz put the unwanted at 0 Hz, where a real capture cannot tell it from a DC offset.
    s = spectrum_of([(2000.0, -6.0, 0.0)])
    message = one_line_plan_error(s, PlanRequest((1000.0,), 1000.0, "above"))
    assert "0 Hz" in message


@settings(max_examples=30, deadline=None)
@given(
    delta=st.floats(-45.0, 45.0),
    side=st.sampled_from(["above", "below"]),
    phase=st.floats(0.0, 2 * np.pi),
    seed=st.integers(0, 2**31 - 1),
)
def test_tuning_error_is_recovered(delta, side, phase, seed):
    # Conventions: search near the nominal place (tens of Hz), then place everything by the
    # exact spacing. Carrier nominally 4000 Hz, really at 4000 + delta.
    sign = 1 if side == "above" else -1
    c = 4000.0 + delta
    s = spectrum_of(
        [(c + sign * 1000.0, -6.0, phase), (c - sign * 1000.0, -46.0, 1.0), (c, -56.0, 2.0)], seed=seed
    )
    found = lock(s, PlanRequest((1000.0,), 4000.0, side))
    assert found.tuning_offset_hz == pytest.approx(delta, abs=0.05)
    assert found.carrier_hz == pytest.approx(c, abs=0.05)
    assert found.side == sign


def test_tuning_error_recovered_with_several_tones():
    delta = -27.3
    c = 6000.0 + delta
    comps = [(c + t, -12.0, 0.1 * t) for t in (500.0, 1000.0, 2000.0)]
    found = lock(spectrum_of(comps), PlanRequest((500.0, 1000.0, 2000.0), 6000.0, "above"))
    assert found.tuning_offset_hz == pytest.approx(delta, abs=0.05)


def test_no_tone_near_the_plan_is_an_error():
    s = spectrum_of([])  # noise only
    message = one_line_plan_error(s, PlanRequest((1000.0,), 4000.0, "auto"))
    assert "no tone" in message


def test_tone_far_from_the_plan_is_an_error():
    # A tone 200 Hz away from both nominal places is outside the +/-50 Hz search.
    s = spectrum_of([(5200.0, -6.0, 0.0)])
    message = one_line_plan_error(s, PlanRequest((1000.0,), 4000.0, "above"))
    assert "no tone" in message


@pytest.mark.parametrize("stronger", ["above", "below"])
def test_auto_side_picks_the_stronger_of_the_pair(stronger):
    # Conventions: "auto" takes the stronger of the pair as the wanted sideband.
    hi, lo = (-10.0, -40.0) if stronger == "above" else (-40.0, -10.0)
    s = spectrum_of([(5000.0, hi, 0.3), (3000.0, lo, 0.0)])
    found = lock(s, PlanRequest((1000.0,), 4000.0, "auto"))
    assert found.wanted_side == stronger


def test_auto_side_in_iq_with_the_wanted_at_negative_frequency():
    s = spectrum_of([(-1500.0, -10.0, 0.3), (500.0, -45.0, 0.0)], iq=True)
    found = lock(s, PlanRequest((1000.0,), -500.0, "auto"))
    assert found.wanted_side == "below"
    assert found.wanted_hz(1000.0) == pytest.approx(-1500.0, abs=0.05)


def test_without_carrier_and_no_residue_asks_for_carrier():
    # Conventions: where both sides are plausible the tool stops and asks for --carrier.
    s = spectrum_of([(5000.0, -10.0, 0.3)])
    message = one_line_plan_error(s, PlanRequest((1000.0,), None, "auto"))
    assert "--carrier" in message


@pytest.mark.parametrize("wanted, carrier", [("above", 4000.0), ("below", 6000.0)])
def test_without_carrier_a_given_side_is_enough(wanted, carrier):
    s = spectrum_of([(5000.0, -10.0, 0.3)])
    found = lock(s, PlanRequest((1000.0,), None, wanted))
    assert found.carrier_hz == pytest.approx(carrier, abs=0.05)
    assert found.tuning_offset_hz is None


@pytest.mark.parametrize("residue_at, carrier, side", [(4000.0, 4000.0, "above"), (6000.0, 6000.0, "below")])
def test_without_carrier_a_residue_decides_the_side(residue_at, carrier, side):
    # A carrier residue at one of the two candidate places singles out that hypothesis.
    s = spectrum_of([(5000.0, -10.0, 0.3), (residue_at, -60.0, 0.0)])
    found = lock(s, PlanRequest((1000.0,), None, "auto"))
    assert found.carrier_hz == pytest.approx(carrier, abs=0.05)
    assert found.wanted_side == side


def test_without_carrier_the_low_side_can_be_ruled_out_by_folding():
    # Wanted found at 800 Hz with tone 1000 Hz: "wanted above" would put the carrier at
    # -200 Hz (folds), so only "below" (carrier 1800 Hz, unwanted 2800 Hz) is legal.
    s = spectrum_of([(800.0, -10.0, 0.3)])
    found = lock(s, PlanRequest((1000.0,), None, "auto"))
    assert found.wanted_side == "below"
    assert found.carrier_hz == pytest.approx(1800.0, abs=0.05)


@pytest.mark.parametrize(
    "kwargs, words",
    [
        ({"tones_hz": ()}, "tone"),
        ({"tones_hz": (-5.0,)}, "positive"),
        ({"tones_hz": (float("nan"),)}, "positive"),
        ({"tones_hz": (1000.0, 1000.0)}, "once"),
        ({"tones_hz": (1000.0,), "carrier_hz": float("inf")}, "finite"),
        ({"tones_hz": (1000.0,), "wanted": "upper"}, "above"),
    ],
)
def test_bad_requests_are_one_line_plan_errors(kwargs, words):
    with pytest.raises(PlanError) as info:
        PlanRequest(**kwargs)
    assert words in str(info.value)
    assert "\n" not in str(info.value)
