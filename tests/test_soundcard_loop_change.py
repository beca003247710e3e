"""A live signal change through a real audio server: PulseAudio's null sink, played and captured.

The generator is switched mid-run with ``SoundCardSource.set_signal`` (no stream is reopened);
the captured audio and the readouts must follow. Skips like ``test_soundcard_loop`` without
PulseAudio or PortAudio, and fails instead under CI.
"""

from __future__ import annotations

import time

import numpy as np
import pytest
import scipy.signal
from test_soundcard_loop import DEVICE, RATE, SETTLE_S, START_TIMEOUT_S, pulse_loop  # noqa: F401  (fixture)

from rtanalyzer.generator import Generator, TwoTone
from rtanalyzer.live.engine import LiveEngine
from rtanalyzer.measurements.twotone import TwoToneMeasurement
from rtanalyzer.sources.soundcard import SoundCardSource

OLD, NEW = (700.0, 1900.0), (1000.0, 2500.0)


def _drain(engine):
    readouts = []
    while not engine.readouts.empty():
        readouts.append(engine.readouts.get_nowait())
    return readouts


def _captured_peaks(source, frames=16384):
    """The two strongest components of the newest captured frames (Hann periodogram, 8x padded)."""
    window, _ = source.ring.latest(frames)
    x = window[:, 0].astype(np.float64)
    freqs, power = scipy.signal.periodogram(x, RATE, window="hann", nfft=8 * frames)
    low = freqs < 1500.0  # one tone of each pair lies below 1.5 kHz, the other above
    return freqs[low][np.argmax(power[low])], freqs[~low][np.argmax(power[~low])]


def test_a_two_tone_changed_mid_run_is_followed_by_capture_and_readouts(pulse_loop):
    gen = Generator(TwoTone(*OLD, -6.0), RATE)
    source = SoundCardSource(DEVICE, DEVICE, RATE, 1, 1024, gen)
    engine = LiveEngine(source, TwoToneMeasurement(), {"tones": list(OLD)}, update_hz=10)
    engine.start()
    try:
        deadline = time.monotonic() + START_TIMEOUT_S
        while source.ring.written < SETTLE_S * RATE:
            assert time.monotonic() < deadline, f"no audio came back through '{DEVICE}': {source.state}"
            time.sleep(0.05)
        _drain(engine)
        time.sleep(1.0)
        before = [r for r in _drain(engine) if r.result is not None]
        # Peaks within 1 Hz: a clean loop leaves the tones where the generator put them (the
        # null sink's 44.1 kHz resampling shifts nothing; 0.6 Hz is the padded periodogram's grid).
        assert _captured_peaks(source) == pytest.approx(OLD, abs=1.0)
        changed_at = source.ring.written
        source.set_signal(TwoTone(*NEW, -6.0))  # live: the streams stay open
        time.sleep(1.5)
        after = _drain(engine)
        assert _captured_peaks(source) == pytest.approx(NEW, abs=1.0)
    finally:
        engine.stop()
    assert len(before) >= 5 and before[-1].result["tone_hz"] == pytest.approx(OLD, abs=1.0)
    good = [r for r in after if r.result is not None]
    assert len(good) >= 5, [r.error for r in after]
    assert good[-1].result["tone_hz"] == pytest.approx(NEW, abs=1.0)
    # Once the readouts name the new tones they never go back to the old (drive_at dates the switch).
    named = [tuple(r.result["tone_hz"]) for r in good]
    first_new = next(k for k, t in enumerate(named) if t == pytest.approx(NEW, abs=1.0))
    assert all(t == pytest.approx(NEW, abs=1.0) for t in named[first_new:]), named
    assert all(r.frame > changed_at for r in good[first_new:])
    each_tone = -6.0 - 20 * np.log10(2)  # equal tones: each 6.02 dB below PEP (arithmetic)
    assert good[-1].result["tone_dbfs"] == pytest.approx([each_tone, each_tone], abs=0.5)
    assert source.outages == 0 and source.drive_at(good[-1].frame - 1).tones_hz == NEW
