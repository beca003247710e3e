"""Level meters with clip hold (`Meters`) and the best-so-far tracker (`BestTracker`).

Meter levels follow AES17 dBFS: a sine of peak A reads 20·log10(A) dBFS on the peak meter, and
the RMS meter is calibrated in sine dBFS so the same sine reads 20·log10(A) there too.
"""

from __future__ import annotations

import numpy as np
import pytest

from rtanalyzer.dsp.clipping import clipped_channels
from rtanalyzer.live.best import STEADY_DB, BestTracker
from rtanalyzer.live.meters import CLIP_HOLD_S, Meters

RATE = 48000


def _sine(peak: float, frames: int = RATE, freq: float = 1000.0) -> np.ndarray:
    # 1000 Hz at 48 kHz: 48 samples a period, sample 0 of each period exactly at the peak,
    # and 48000 frames hold whole periods, so mean(x²) = A²/2 exactly (arithmetic).
    return peak * np.cos(2 * np.pi * freq * np.arange(frames) / RATE)


# ---- levels ------------------------------------------------------------------------------


@pytest.mark.parametrize("dbfs", [-6.0, -20.0, -60.0])
def test_sine_reads_its_peak_level_on_both_meters(dbfs):
    a = 10 ** (dbfs / 20)
    m = Meters(1, RATE)
    m.update(_sine(a)[:, None])
    # AES17: a sine of peak A is 20·log10(A) dBFS, peak and (sine-calibrated) RMS alike
    assert m.peak_dbfs[0] == pytest.approx(dbfs, abs=1e-9)
    assert m.rms_dbfs[0] == pytest.approx(dbfs, abs=1e-9)
    d = m.as_dict()
    assert d["peak_dbfs"] == [pytest.approx(dbfs, abs=0.005)]
    assert d["rms_dbfs"] == [pytest.approx(dbfs, abs=0.005)]
    assert d["clip"] == [False] and d["clipped_samples"] == [0]


def test_square_wave_rms_reads_3db_above_its_peak():
    # AES17 convention: a full-scale square wave's RMS is 3.01 dB above a full-scale sine's.
    x = np.tile([0.5, -0.5], RATE // 2)
    m = Meters(1, RATE)
    m.update(x[:, None])
    assert m.peak_dbfs[0] == pytest.approx(20 * np.log10(0.5), abs=1e-9)
    assert m.rms_dbfs[0] - m.peak_dbfs[0] == pytest.approx(10 * np.log10(2), abs=1e-9)


def test_silence_reads_no_level_and_empty_update_changes_nothing():
    m = Meters(1, RATE)
    m.update(np.zeros((0, 1)))
    assert m.as_dict()["peak_dbfs"] == [None]
    m.update(np.zeros((100, 1)))
    d = m.as_dict()
    assert d["peak_dbfs"] == [None] and d["rms_dbfs"] == [None]


def test_channels_are_independent():
    m = Meters(2, RATE)
    x = np.column_stack([_sine(0.5), np.zeros(RATE)])
    x[1000:1003, 1] = 1.0  # a run of full-scale samples on channel 2 only
    m.update(x)
    d = m.as_dict()
    assert d["peak_dbfs"][0] == pytest.approx(20 * np.log10(0.5), abs=0.005)
    assert d["peak_dbfs"][1] == pytest.approx(0.0, abs=0.005)
    assert d["clip"] == [False, True]
    assert d["clipped_samples"] == [0, 3]


# ---- clip light --------------------------------------------------------------------------


def test_clip_light_holds_for_clip_hold_then_clears():
    hold = int(CLIP_HOLD_S * RATE)
    m = Meters(1, RATE)
    m.update(_sine(0.5, 4800)[:, None])
    assert m.clipping() == [False]
    block = np.zeros((480, 1))
    block[-2:] = -1.0  # a short run of full-scale samples, the last sample of the block
    m.update(block)
    assert m.clipping() == [True]
    # arithmetic: CLIP_HOLD_S of further frames keeps it on, one frame more clears it
    m.update(np.zeros((hold - 1, 1)))
    assert m.clipping() == [True]
    m.update(np.zeros((1, 1)))
    assert m.clipping() == [True]
    m.update(np.zeros((1, 1)))
    assert m.clipping() == [False]
    assert m.as_dict()["clipped_samples"] == [2]  # the count stays


def test_clip_light_hold_counts_from_the_clipped_sample_not_the_update():
    # Meters' docstring: "on from a clipped sample until CLIP_HOLD_S later". The engine hands
    # over up to half the ring (4 s) at once after a stall, so the clip may sit early in a long
    # update. Tolerance: one readout interval at the default 20/s (common practice, no source).
    hold = int(CLIP_HOLD_S * RATE)
    m = Meters(1, RATE)
    block = np.zeros((RATE, 1))  # one second of audio in one update
    block[:2] = 1.0  # clipped at its very start
    m.update(block)
    m.update(np.zeros((hold - RATE + RATE // 20, 1)))  # now CLIP_HOLD_S + 50 ms after the clip
    assert m.clipping() == [False]


def test_full_scale_sine_is_not_a_clip():
    # A sine whose peak touches full scale is 0 dBFS by definition (AES17), not an over; the
    # offline detector (dsp/clipping.py: an over is a run of two or more full-scale samples,
    # common practice) agrees. The live clip light must not disagree with the offline flag
    # for the same samples.
    x = _sine(1.0)[:, None]
    assert clipped_channels(x, 2.0**-15) == (False,)
    m = Meters(1, RATE)
    m.update(x)
    assert m.peak_dbfs[0] == pytest.approx(0.0, abs=1e-9)
    assert m.clipping() == [False]


# ---- best so far -------------------------------------------------------------------------


def test_best_tracker_for_known_and_unknown_measurements():
    sb = BestTracker.for_measurement("sideband")
    assert sb.key == "worst_sideband_suppression_db" and sb.larger_is_better
    tt = BestTracker.for_measurement("twotone")
    assert tt.key == "worst_imd_db_pep" and not tt.larger_is_better
    assert BestTracker.for_measurement("no-such-thing") is None


def test_best_of_suppression_is_the_largest_and_trend_follows_the_last_change():
    b = BestTracker.for_measurement("sideband")
    assert b.as_dict() == {"figure": "worst_sideband_suppression_db", "value": None, "best": None,
                           "trend": "steady"}
    b.update({"worst_sideband_suppression_db": 30.0})
    assert (b.best, b.last, b.trend) == (30.0, 30.0, "steady")
    b.update({"worst_sideband_suppression_db": 35.0})
    assert (b.best, b.trend) == (35.0, "better")
    b.update({"worst_sideband_suppression_db": 33.0})
    assert (b.best, b.last, b.trend) == (35.0, 33.0, "worse")
    b.update({"worst_sideband_suppression_db": 33.0 + STEADY_DB / 2})  # readout noise
    assert b.trend == "steady"
    b.update({"worst_sideband_suppression_db": None})  # no figure this time: nothing changes
    b.update({})
    assert (b.best, b.last) == (35.0, 33.0 + STEADY_DB / 2)
    b.reset()  # best starts again from the last value
    assert b.best == b.last
    b.update({"worst_sideband_suppression_db": 34.0})
    assert b.best == 34.0


def test_best_of_imd_is_the_most_negative():
    b = BestTracker.for_measurement("twotone")
    b.update({"worst_imd_db_pep": -30.0})
    b.update({"worst_imd_db_pep": -34.0})
    assert (b.best, b.trend) == (-34.0, "better")
    b.update({"worst_imd_db_pep": -31.0})
    assert (b.best, b.last, b.trend) == (-34.0, -31.0, "worse")
    assert b.as_dict() == {"figure": "worst_imd_db_pep", "value": -31.0, "best": -34.0, "trend": "worse"}


def test_the_trimmed_figure_is_the_worst_inside_the_band_when_there_is_one():
    # A tone outside the voice band (here 3400 Hz at 28 dB) must not decide a trim judged over
    # 300-3000 Hz (common practice, no source); with no point in the band the overall worst counts.
    from rtanalyzer.live.best import BestTracker, figure_value

    inside = {"worst_sideband_suppression_db": 28.0,
              "worst_in_band": {"tone_hz": 1000.0, "sideband_suppression_db": 35.0, "is_lower_bound": False}}
    outside = {"worst_sideband_suppression_db": 28.0, "worst_in_band": None}
    assert figure_value("sideband", inside) == 35.0
    assert figure_value("sideband", outside) == 28.0
    assert figure_value("quadrature", {"worst_predicted_suppression_db": 30.0,
                                       "band": {"worst_predicted_suppression_db": 33.0}}) == 33.0
    b = BestTracker.for_measurement("sideband")
    b.update(inside)
    assert b.as_dict()["value"] == 35.0


def test_a_clipped_readout_is_not_a_best():
    # Figures from a clipped input are not what a trim reached (common practice, no source).
    b = BestTracker.for_measurement("sideband")
    b.update({"worst_sideband_suppression_db": 30.0})
    b.update({"worst_sideband_suppression_db": 80.0, "clipped": True})
    assert b.as_dict()["best"] == 30.0 and b.as_dict()["value"] == 30.0
