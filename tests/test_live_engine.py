"""The live engine, stepped by hand: readouts against the simulated bench's exact truth.

No threads here except in the one liveness test: the bench source renders blocks on request
(`render_block`), the test writes them into the source's ring, and `LiveEngine.step()` makes a
readout from the newest window. The oracle is `BenchSource.truth()`, computed exactly from the
bench model (sources/bench/truth.py), not measured. Tolerances: the live window is short
(~85 ms, 4096 frames at 48 kHz, bins of 11.7 Hz), so 0.3 dB for sideband and carrier
suppression and 0.5 dB for IMD (common practice, no source: about the spread of a
Blackman-Harris level reading with the bench's noise at these levels).
"""

from __future__ import annotations

import json
import math
import threading
import time

import numpy as np
import pytest

from rtanalyzer.errors import RtaError
from rtanalyzer.generator.signals import Sweep, Tone, TwoTone
from rtanalyzer.live.engine import LiveEngine, Readout, live_nfft
from rtanalyzer.measurements.sideband import SidebandMeasurement
from rtanalyzer.measurements.twotone import TwoToneMeasurement
from rtanalyzer.sources.bench import Bench, simulate_capture
from rtanalyzer.sources.bench.knobs import BenchKnobs
from rtanalyzer.sources.bench_source import BenchSource
from rtanalyzer.sources.capture import Capture
from rtanalyzer.sources.file_source import FileSource

RATE = 48000
BLOCK = 1024
SB_TOL_DB = 0.3
IMD_TOL_DB = 0.5


def _feed(source, blocks: int) -> list[np.ndarray]:
    """Render ``blocks`` blocks into the source's ring, as its thread would; return them."""
    out = []
    for _ in range(blocks):
        block = source.render_block(source.block)
        source.ring.write(block)
        out.append(block)
    return out


def _window_blocks(engine) -> int:
    return math.ceil(engine.nfft / BLOCK)


def _sideband(knobs=None, iq=False, **engine_kw):
    knobs = knobs or BenchKnobs()
    source = BenchSource(knobs, Tone(1000.0, -6.0), RATE, BLOCK)
    settings = {"tone": [1000.0], "carrier": knobs.carrier_offset_hz}
    return source, LiveEngine(source, SidebandMeasurement(), settings, iq=iq, **engine_kw)


# ---- readouts against the truth ----------------------------------------------------------


def test_no_audio_yet_is_said_not_raised():
    source, engine = _sideband()
    r = engine.step()
    assert isinstance(r, Readout)
    assert r.result is None and r.error == "filling the analysis window"
    assert r.frame == 0
    _feed(source, _window_blocks(engine) - 1)  # one block short of a window
    assert engine.step().error == "filling the analysis window"


def test_live_window_is_about_85_ms():
    # engine.py: a power of two near 85 ms; at 48 kHz 0.085·48000 = 4080 -> 4096 (arithmetic)
    assert live_nfft(48000) == 4096
    assert live_nfft(96000) == 8192
    assert live_nfft(48000, resolution_hz=1.0) == 65536  # 1 Hz bins: 48000 rounded to 2**16


def test_sideband_readout_agrees_with_the_truth():
    source, engine = _sideband()
    assert engine.nfft == 4096
    _feed(source, 8)
    r = engine.step()
    truth = source.truth()
    assert r.error is None and r.result is not None
    assert r.measurement == "sideband"
    assert r.frame == source.ring.written == 8 * BLOCK
    res = r.result
    assert res["worst_sideband_suppression_db"] == pytest.approx(truth["worst_sideband_suppression_db"], abs=SB_TOL_DB)
    assert res["carrier_suppression_db"] == pytest.approx(truth["carrier_suppression_db"], abs=SB_TOL_DB)
    assert res["carrier_hz"] == pytest.approx(truth["carrier_hz"], abs=1.0)
    assert res["sample_rate_hz"] == RATE
    # the best-so-far follows the sideband figure
    assert r.best["figure"] == "worst_sideband_suppression_db"
    assert r.best["value"] == res["worst_sideband_suppression_db"] == r.best["best"]
    assert set(r.timing) == {"dsp_s", "measure_s"}
    assert r.state == "stopped"  # never started: fed by hand


def test_readout_json_is_flat_and_strict_json():
    source, engine = _sideband()
    _feed(source, 6)
    r = engine.step()
    j = r.as_json()
    for key in ("t", "measurement", "levels", "xruns", "error", "source_state", "best"):
        assert key in j
    for key, value in r.result.items():  # the measurement's keys, unchanged, at top level
        assert j[key] == value
    assert "sweep" not in j
    json.dumps(j, allow_nan=False)


def test_a_knob_turn_shows_within_one_window_of_new_frames():
    knobs = BenchKnobs()
    source, engine = _sideband(knobs)
    _feed(source, 8)
    before = engine.step().result["worst_sideband_suppression_db"]
    old_truth = source.truth()["worst_sideband_suppression_db"]
    assert before == pytest.approx(old_truth, abs=SB_TOL_DB)
    source.set_knobs(knobs.with_changes(phase_trim_deg=0.3, amplitude_trim_db=0.05))
    _feed(source, _window_blocks(engine))  # >= nfft frames rendered with the new knobs
    r = engine.step()
    truth = source.truth()
    assert truth["worst_sideband_suppression_db"] - old_truth > 5.0  # the turn is a big one
    assert r.result["worst_sideband_suppression_db"] == pytest.approx(truth["worst_sideband_suppression_db"], abs=SB_TOL_DB)
    assert r.result["carrier_suppression_db"] == pytest.approx(truth["carrier_suppression_db"], abs=SB_TOL_DB)
    assert r.best["trend"] == "better" and r.best["best"] == r.result["worst_sideband_suppression_db"]


def test_a_knob_turn_shows_within_two_readouts_at_the_default_rate():
    # Readouts every rate/update_hz frames (20/s: 2400 frames), fed in whole blocks; the knob
    # turns just after a readout. "A knob moves the figure within one or two readouts."
    knobs = BenchKnobs()
    source, engine = _sideband(knobs)
    interval = int(RATE / engine.update_hz)
    _feed(source, 8)
    engine.step()
    source.set_knobs(knobs.with_changes(phase_trim_deg=0.3, amplitude_trim_db=0.05))
    due = source.ring.written
    figures = []
    for _ in range(2):
        due += interval
        while source.ring.written < due:
            _feed(source, 1)
        figures.append(engine.step().result["worst_sideband_suppression_db"])
    truth = source.truth()["worst_sideband_suppression_db"]
    assert figures[-1] == pytest.approx(truth, abs=SB_TOL_DB)


def test_averaging_engine_restarts_its_average_on_new_settings():
    source, engine = _sideband(averages=4)
    _feed(source, 6)
    for _ in range(3):
        _feed(source, 1)
        r = engine.step()
    assert r.result["worst_sideband_suppression_db"] == pytest.approx(
        source.truth()["worst_sideband_suppression_db"], abs=SB_TOL_DB)
    engine.update_settings(wanted="above")
    assert engine.settings["wanted"] == "above" and engine.settings["tone"] == [1000.0]
    _feed(source, 1)
    r = engine.step()
    # one window since the change: the same figures as a fresh engine's first readout
    fresh = LiveEngine(source, SidebandMeasurement(), engine.settings, averages=4).step()
    assert r.result == fresh.result
    assert r.result["worst_sideband_suppression_db"] == pytest.approx(
        source.truth()["worst_sideband_suppression_db"], abs=SB_TOL_DB)


def test_plan_error_becomes_the_readouts_error():
    knobs = BenchKnobs()
    source = BenchSource(knobs, Tone(1000.0, -6.0), RATE, BLOCK)
    engine = LiveEngine(source, SidebandMeasurement(), {"tone": [1000.0], "carrier": 30000.0})
    _feed(source, 5)
    r = engine.step()
    assert r.result is None
    assert "Nyquist" in r.error and "\n" not in r.error
    assert r.best["value"] is None  # nothing to track


def test_twotone_imd3_agrees_with_the_truth():
    source = BenchSource(BenchKnobs(), TwoTone(700.0, 1900.0, -6.0), RATE, BLOCK)
    engine = LiveEngine(source, TwoToneMeasurement(), {"tones": [700.0, 1900.0], "carrier": 4000.0})
    _feed(source, 8)
    r = engine.step()
    assert r.error is None and r.measurement == "twotone"
    truth = source.truth()["twotone"]
    imd3 = next(o for o in r.result["imd"] if o["order"] == 3)
    assert imd3["worst_db_pep"] == pytest.approx(truth["imd"][0]["worst_db_pep"], abs=IMD_TOL_DB)
    assert r.result["pep_dbfs"] == pytest.approx(truth["pep_dbfs"], abs=IMD_TOL_DB)
    assert r.best["figure"] == "worst_imd_db_pep"


def test_iq_readout_agrees_with_the_truth():
    knobs = BenchKnobs().with_changes(iq=True)
    source, engine = _sideband(knobs, iq=True)
    assert source.channels == 2
    _feed(source, 8)
    r = engine.step()
    truth = source.truth()
    assert r.error is None
    assert r.result["worst_sideband_suppression_db"] == pytest.approx(truth["worst_sideband_suppression_db"], abs=SB_TOL_DB)
    assert r.result["carrier_suppression_db"] == pytest.approx(truth["carrier_suppression_db"], abs=SB_TOL_DB)
    assert len(r.levels["peak_dbfs"]) == 2


@pytest.mark.parametrize(
    "kw, needle",
    [({"iq": True}, "two input channels"), ({"channel": 3}, "channel 3"), ({"channel": 0}, "channel 0"),
     ({"update_hz": 1000.0}, "update rate"), ({"update_hz": 0.1}, "update rate")],
)
def test_bad_view_or_rate_is_one_line_rta_error(kw, needle):
    source = BenchSource(BenchKnobs(), Tone(1000.0, -6.0), RATE, BLOCK)  # mono
    with pytest.raises(RtaError) as info:
        LiveEngine(source, SidebandMeasurement(), {"tone": [1000.0]}, **kw)
    assert needle in str(info.value) and "\n" not in str(info.value)


# ---- sweep -------------------------------------------------------------------------------


def test_sweep_readouts_settle_then_report_the_step_tone():
    knobs = BenchKnobs()
    sweep = Sweep.log_range(500.0, 2000.0, 4, -6.0, dwell_s=0.5, settle_s=0.15)
    source = BenchSource(knobs, sweep, RATE, BLOCK)
    engine = LiveEngine(source, SidebandMeasurement(), {"tone": [1000.0], "carrier": knobs.carrier_offset_hz})
    dwell, settle = int(0.5 * RATE), int(0.15 * RATE)
    truths = {f: Bench(knobs, [f], RATE).truth()["worst_sideband_suppression_db"] for f in sweep.frequencies_hz}
    settled_steps, settling = set(), 0
    for _ in range(4 * dwell // BLOCK):  # one pass, a readout per block
        _feed(source, 1)
        r = engine.step()
        if r.error == "filling the analysis window":
            continue
        end = r.frame
        first = end - engine.nfft
        step = first // dwell
        # arithmetic: the window [first, end) lies in one step, past its settling time, or not
        inside = (end - 1) // dwell == step and first - step * dwell >= settle
        assert r.sweep is not None
        if not inside:
            assert r.result is None and r.error == "settling", (first, end)
            assert r.sweep["settled"] is False
            settling += 1
            continue
        freq = sweep.frequencies_hz[step]
        assert r.error is None, (first, end, r.error)
        assert r.sweep == {"step": step, "frequency_hz": freq, "settled": True}
        assert [p["tone_hz"] for p in r.result["points"]] == [pytest.approx(freq)]
        assert r.result["worst_sideband_suppression_db"] == pytest.approx(truths[freq], abs=SB_TOL_DB)
        assert r.as_json()["sweep"] == r.sweep
        settled_steps.add(step)
    assert settled_steps == {0, 1, 2, 3} and settling > 4


def test_sweep_shorter_than_the_window_never_reads_as_settled():
    # A sweep whose whole pass (2 × 30 ms) is shorter than the 85 ms window: every window holds
    # both tones, so no readout may claim a settled step (arithmetic). The engine compares only
    # the first and last frames' step, which match whenever the window wraps round a full pass.
    sweep = Sweep((500.0, 1000.0), -6.0, dwell_s=0.03, settle_s=0.001)
    source = BenchSource(BenchKnobs(), sweep, RATE, BLOCK)
    engine = LiveEngine(source, SidebandMeasurement(), {"tone": [1000.0], "carrier": 4000.0})
    claimed = []
    for _ in range(30):
        _feed(source, 1)
        r = engine.step()
        if r.result is not None:
            claimed.append((r.frame, r.sweep, r.result["worst_sideband_suppression_db"]))
    assert claimed == []


# ---- meters and xruns --------------------------------------------------------------------


def test_meters_and_xruns_follow_the_bench_samples():
    source, engine = _sideband()
    blocks = _feed(source, 8)
    r = engine.step()
    assert set(r.xruns) == {"input_overflows", "output_underflows", "dropped_blocks"}
    assert all(v == 0 for v in r.xruns.values())
    assert set(r.levels) == {"peak_dbfs", "rms_dbfs", "clip", "clipped_samples"}
    x = np.concatenate(blocks)[:, 0]
    # AES17 dBFS, computed here from the bench's own samples (ring keeps float32: 0.02 dB)
    assert r.levels["peak_dbfs"][0] == pytest.approx(20 * np.log10(np.max(np.abs(x))), abs=0.02)
    rms_sine_db = 20 * np.log10(np.sqrt(np.mean(x * x)) * np.sqrt(2))
    assert r.levels["rms_dbfs"][0] == pytest.approx(rms_sine_db, abs=0.02)
    assert r.levels["clip"] == [False]
    # the next readout meters only the frames since this one
    newer = _feed(source, 2)
    r = engine.step()
    y = np.concatenate(newer)[:, 0]
    assert r.levels["peak_dbfs"][0] == pytest.approx(20 * np.log10(np.max(np.abs(y))), abs=0.02)


def test_clipping_bench_lights_the_clip_and_flags_the_result():
    knobs = BenchKnobs().with_changes(capture_pep_dbfs=6.0)  # the sound card clips (knobs.py)
    source, engine = _sideband(knobs)
    _feed(source, 6)
    r = engine.step()
    assert r.levels["clip"] == [True] and r.levels["clipped_samples"][0] > 0
    assert r.result is not None and r.result["clipped"] is True


# ---- file source -------------------------------------------------------------------------


def _capture(frames: int, channels: int = 1) -> Capture:
    data = np.arange(frames * channels, dtype=np.float64).reshape(frames, channels) / (frames * channels)
    return Capture(data, RATE, source="made.wav")


def test_file_source_plays_once_then_ends():
    cap = _capture(5000)
    src = FileSource(cap, loop=False, block=BLOCK)
    blocks = []
    while (b := src.render_block(src.block)) is not None:
        blocks.append(b)
        assert len(blocks) < 10
    assert [len(b) for b in blocks] == [1024, 1024, 1024, 1024, 904]
    np.testing.assert_array_equal(np.concatenate(blocks), cap.samples)
    assert src.render_block(src.block) is None  # and stays ended


@pytest.mark.parametrize("frames", [5000, 2048, 1500, 300], ids=["longer", "exact", "odd", "shorter-than-block"])
def test_file_source_loops_seamlessly_in_whole_blocks(frames):
    # Oracle: the capture tiled end to end (arithmetic); a paced source assumes each block is
    # `block` frames long (paced.py sleeps one block period per block).
    cap = _capture(frames, 2)
    src = FileSource(cap, loop=True, block=BLOCK)
    blocks = [src.render_block(BLOCK) for _ in range(12)]
    assert all(b is not None and b.shape == (BLOCK, 2) for b in blocks), [None if b is None else b.shape for b in blocks]
    tiled = np.tile(cap.samples, (12 * BLOCK // frames + 2, 1))[: 12 * BLOCK]
    np.testing.assert_array_equal(np.concatenate(blocks), tiled)


def test_file_source_through_the_engine_agrees_with_the_files_truth():
    knobs = BenchKnobs()
    samples, truth = simulate_capture(knobs, [1000.0], 0.5, RATE)
    src = FileSource(Capture(samples, RATE, source="sim.wav"), block=BLOCK)
    engine = LiveEngine(src, SidebandMeasurement(), {"tone": [1000.0], "carrier": 4000.0})
    while (b := src.render_block(src.block)) is not None:
        src.ring.write(b)
    r = engine.step()
    assert r.frame == len(samples)
    assert r.result["worst_sideband_suppression_db"] == pytest.approx(truth["worst_sideband_suppression_db"], abs=SB_TOL_DB)
    assert r.result["carrier_suppression_db"] == pytest.approx(truth["carrier_suppression_db"], abs=SB_TOL_DB)


# ---- threads: liveness only ---------------------------------------------------------------


def test_threads_deliver_readouts_and_stop_cleanly():
    # Generous liveness only (speed is measured in scripts/bench_live.py): the default is 20
    # readouts/s; at least 10/s on average over 2 s, and stop() joins every thread it started.
    before = threading.active_count()
    source, engine = _sideband()
    seen = []
    engine.on_readout = seen.append
    got = []
    engine.start()
    try:
        t_end = time.monotonic() + 2.0
        while time.monotonic() < t_end:
            try:
                got.append(engine.readouts.get(timeout=0.2))
            except Exception:
                pass
    finally:
        engine.stop()
    assert len(got) >= 20, len(got)
    assert len(seen) >= len(got)
    assert any(r.result is not None for r in got)
    assert all(b.t > a.t for a, b in zip(got, got[1:]))
    assert threading.active_count() == before, [t.name for t in threading.enumerate()]
    assert not any(t.name.startswith("rtanalyzer") for t in threading.enumerate())


def test_dense_multitone_gets_a_window_long_enough_for_every_tone():
    # 16 log-spaced tones over 300-3000 Hz: the closest pair is 50 Hz apart, closer than the
    # plan's collision guard of 2·6 bins at the 85 ms window's 11.7 Hz bins (140.6 Hz), so the
    # session lengthens the window (arithmetic: 12 bins within 50 Hz needs bins <= 4.2 Hz,
    # nfft >= 11520 at 48 kHz, the next power of two 16384).
    from rtanalyzer.generator.signals import Multitone
    from rtanalyzer.live.session import SessionConfig, build_engine

    tones = Multitone.spread(300.0, 3000.0, 16, -6.0)
    # Driven well below saturation: a multitone's own intermodulation would otherwise sprinkle
    # products next to the unwanted sidebands, which no window length separates.
    knobs = BenchKnobs(drive_db=-30.0)
    engine = build_engine(SessionConfig(source="sim", signal=tones, knobs=knobs, measurement="sideband"))
    assert engine.nfft == 16384
    source = engine.source
    for _ in range(math.ceil(engine.nfft / source.block) + 2):
        source.ring.write(source.render_block(source.block))
    readout = engine.step()
    assert readout.error is None, readout.error
    got = {p["tone_hz"]: p for p in readout.result["points"]}
    truth = {p["tone_hz"]: p for p in source.truth()["points"]}
    assert sorted(got) == pytest.approx(sorted(truth))
    for f, p in got.items():
        assert p["sideband_suppression_db"] == pytest.approx(truth[f]["sideband_suppression_db"], abs=SB_TOL_DB)


def test_a_window_across_a_signal_change_is_not_measured():
    # The bench switches from 1000 Hz to 1500 Hz at a block boundary: a window holding frames of
    # both is "settling" (its spectrum mixes two drives), the first window wholly after the change
    # reports the new tone only, and an averaging engine starts its average afresh there.
    source, engine = _sideband(averages=4)
    _feed(source, _window_blocks(engine) + 2)
    assert engine.step().result["points"][0]["tone_hz"] == 1000.0
    source.set_signal(Tone(1500.0, -6.0))
    _feed(source, 1)
    straddling = engine.step()
    assert straddling.result is None and straddling.error == "settling"
    _feed(source, _window_blocks(engine))
    after = engine.step()
    assert after.error is None and [p["tone_hz"] for p in after.result["points"]] == [1500.0]
    assert after.spectrum.segments == 1  # the average holds the new tone's spectrum only
    truth = source.truth()
    assert after.result["worst_sideband_suppression_db"] == pytest.approx(truth["worst_sideband_suppression_db"],
                                                                         abs=SB_TOL_DB)
