"""The sound-card source with a fake PortAudio: callback copies, underflows, mute, device loss, errors.

No sound card or PortAudio is needed: ``soundcard_devices.load_sounddevice`` returns a stand-in
module and streams come from a fake factory whose callbacks the test calls by hand (or from a
thread, for the device-loss tests).
"""

from __future__ import annotations

import builtins
import sys
import threading
import time
import tracemalloc
from types import SimpleNamespace

import numpy as np
import pytest
import scipy.signal

from rtanalyzer.generator import Generator, GeneratorError, Quadrature, Sweep, Tone, TwoTone
from rtanalyzer.live.engine import LiveEngine
from rtanalyzer.measurements.twotone import TwoToneMeasurement
from rtanalyzer.sources import soundcard, soundcard_devices
from rtanalyzer.sources.live import Drive
from rtanalyzer.sources.ring import FrameRing
from rtanalyzer.sources.soundcard import LEAD_BLOCKS, LOST_STATE, SoundCardSource
from rtanalyzer.sources.soundcard_devices import MISSING_PORTAUDIO, SoundCardError, find_device

RATE = 48000
BLOCK = 256


class FakePortAudioError(Exception):
    pass


class FakeSd:
    """The parts of sounddevice the source uses, over a fixed device list."""

    PortAudioError = FakePortAudioError

    def __init__(self, devices, default=(0, 0)):
        self.devices = [
            {"index": i, "name": name, "hostapi": 0, "max_input_channels": ins, "max_output_channels": outs,
             "default_samplerate": 48000.0, "rates": rates}
            for i, (name, ins, outs, rates) in enumerate(devices)
        ]
        self.default = SimpleNamespace(device=default)

    def query_devices(self):
        return [dict(d) for d in self.devices]

    def query_hostapis(self, index):
        return {"name": "Fake API"}

    def _check(self, key, device, channels, samplerate, dtype):
        d = self.devices[device]
        if channels > d[key] or samplerate not in d["rates"]:
            raise FakePortAudioError("Invalid sample rate or channel count")

    def check_input_settings(self, device=None, channels=None, samplerate=None, dtype=None):
        self._check("max_input_channels", device, channels, samplerate, dtype)

    def check_output_settings(self, device=None, channels=None, samplerate=None, dtype=None):
        self._check("max_output_channels", device, channels, samplerate, dtype)


ALL_RATES = (44100, 48000, 96000, 192000)
DEVICES = [
    ("USB Audio CODEC", 2, 2, (44100, 48000)),
    ("USB Audio Device", 1, 0, ALL_RATES),
    ("pulse", 32, 32, ALL_RATES),
    ("pulse monitor", 2, 0, ALL_RATES),
    ("HDMI out", 0, 8, ALL_RATES),
]


class FakeStream:
    """An input or output stream whose callback the test (or a pump thread) calls."""

    LATENCY_S = {"input": 0.01, "output": 0.02}  # 480 + 960 = 1440 frames at 48 kHz

    def __init__(self, kind, **kwargs):
        self.kind = kind
        self.kwargs = kwargs
        self.latency = self.LATENCY_S[kind]
        self.active = False
        self.closed = False
        self.channels = kwargs["channels"]

    def start(self):
        self.active = True

    def close(self):
        self.active = False
        self.closed = True

    def pump(self, indata=None, status=None, frames=BLOCK):
        """One callback; an output stream returns the block the source filled."""
        status = status or FakeStatus()
        if self.kind == "input":
            if indata is None:
                indata = np.zeros((frames, self.channels), dtype=np.float32)
            self.kwargs["callback"](indata, frames, None, status)
            return None
        out = np.full((frames, self.channels), np.nan, dtype=np.float32)  # must be overwritten
        self.kwargs["callback"](out, frames, None, status)
        return out


class FakeStatus:
    def __init__(self, input_overflow=False, output_underflow=False):
        self.input_overflow = input_overflow
        self.output_underflow = output_underflow

    def __bool__(self):
        return self.input_overflow or self.output_underflow


class Factory:
    """Makes FakeStreams; raises FakePortAudioError while ``available`` is False."""

    def __init__(self, stream_class=FakeStream):
        self.streams: list[FakeStream] = []
        self.available = True
        self.attempts = 0
        self.stream_class = stream_class

    def __call__(self, kind, **kwargs):
        self.attempts += 1
        if not self.available:
            raise FakePortAudioError("Error opening Stream: Device unavailable [PaErrorCode -9985]")
        stream = self.stream_class(kind, **kwargs)
        self.streams.append(stream)
        return stream

    def latest(self, kind):
        return [s for s in self.streams if s.kind == kind][-1]


@pytest.fixture
def fake_sd(monkeypatch):
    sd = FakeSd(DEVICES, default=(2, 2))
    monkeypatch.setattr(soundcard_devices, "load_sounddevice", lambda: sd)
    return sd


@pytest.fixture
def running():
    """Sources started in a test, stopped afterwards whatever happens."""
    started = []
    yield started
    for source in started:
        source.stop(1.0)


def start(source, running):
    running.append(source)
    source.start()
    return source


def wait_for(predicate, timeout=5.0):
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        if predicate():
            return True
        time.sleep(0.01)
    return False


# -- the callback -------------------------------------------------------------------------------


def test_input_callback_copies_into_the_ring(fake_sd, running):
    factory = Factory()
    source = start(SoundCardSource("USB Audio CODEC", rate_hz=RATE, input_channels=2, block=BLOCK,
                                   stream_factory=factory), running)
    assert [s.kind for s in factory.streams] == ["input"]  # no renderer: nothing to play
    stream = factory.latest("input")
    assert stream.kwargs["device"] == 0 and stream.kwargs["channels"] == 2
    assert stream.kwargs["samplerate"] == RATE and stream.kwargs["blocksize"] == BLOCK
    block = np.random.default_rng(1).standard_normal((BLOCK, 2)).astype(np.float32)
    stream.pump(block)
    stream.pump(2 * block)
    np.testing.assert_array_equal(source.ring.read(0, BLOCK), block)
    np.testing.assert_array_equal(source.ring.read(BLOCK, BLOCK), 2 * block)
    assert source.state == "running"


def test_output_callback_plays_the_generator_while_input_captures(fake_sd, running):
    factory = Factory()
    gen = Generator(Tone(1000.0, -6.0), RATE)
    source = start(SoundCardSource("pulse", "pulse", RATE, 1, BLOCK, gen, stream_factory=factory), running)
    out, inp = factory.latest("output"), factory.latest("input")
    assert (out.kwargs["device"], out.kwargs["channels"]) == (2, 1)
    assert (inp.kwargs["device"], inp.kwargs["channels"]) == (2, 1)
    reference = Generator(Tone(1000.0, -6.0), RATE).render(8 * BLOCK).astype(np.float32)
    captured = np.random.default_rng(2).standard_normal((BLOCK, 1)).astype(np.float32)
    played = []
    for _ in range(8):  # twice the lead: the producer thread must top up meanwhile
        assert wait_for(lambda: source._out_ring.written - source._played >= BLOCK)
        played.append(out.pump())
        inp.pump(captured)
    # block-wise rendering equals one long render to rounding (the generator's promise)
    np.testing.assert_allclose(np.concatenate(played), reference, rtol=0, atol=1e-6)
    np.testing.assert_array_equal(source.ring.read(7 * BLOCK, BLOCK), captured)
    assert source.counters.as_dict() == {"input_overflows": 0, "output_underflows": 0, "dropped_blocks": 0}


def test_callbacks_allocate_no_sample_arrays(fake_sd, running):
    factory = Factory()
    source = start(SoundCardSource("pulse", "pulse", RATE, 2, 1024, Generator(Tone(1000.0, -6.0), RATE, 2),
                                   stream_factory=factory), running)
    out_cb, in_cb = factory.latest("output").kwargs["callback"], factory.latest("input").kwargs["callback"]
    source.stop(1.0)  # no producer: the output ring runs dry, which the callback must handle too
    indata = np.zeros((1024, 2), dtype=np.float32)
    outdata = np.zeros((1024, 2), dtype=np.float32)
    status = FakeStatus()
    tracemalloc.start()
    try:
        before = tracemalloc.get_traced_memory()[0]
        tracemalloc.reset_peak()
        for _ in range(LEAD_BLOCKS + 4):
            out_cb(outdata, 1024, None, status)
            in_cb(indata, 1024, None, status)
        peak = tracemalloc.get_traced_memory()[1] - before
    finally:
        tracemalloc.stop()
    assert source.counters.output_underflows == 4
    assert peak < 2048, f"the callbacks allocated {peak} bytes (one block is {indata.nbytes})"


def test_status_flags_are_counted(fake_sd, running):
    factory = Factory()
    source = start(SoundCardSource("pulse", "pulse", RATE, 1, BLOCK, Generator(Tone(1000.0, -6.0), RATE),
                                   stream_factory=factory), running)
    out, inp = factory.latest("output"), factory.latest("input")
    inp.pump(status=FakeStatus(input_overflow=True))
    inp.pump(status=FakeStatus(input_overflow=True))
    out.pump(status=FakeStatus(output_underflow=True))
    assert source.counters.input_overflows == 2
    assert source.counters.output_underflows == 1


class StallingGenerator(Generator):
    """Renders its first ``allowed`` blocks, then blocks in render_into until released."""

    def __init__(self, *args, allowed, **kwargs):
        super().__init__(*args, **kwargs)
        self.allowed = allowed
        self.release = threading.Event()

    def render_into(self, out):
        if self.allowed <= 0:
            self.release.wait(10.0)
        self.allowed -= 1
        super().render_into(out)


def test_an_empty_output_ring_plays_zeros_and_counts_an_underflow(fake_sd, running):
    factory = Factory()
    gen = StallingGenerator(Tone(1000.0, -6.0), RATE, allowed=LEAD_BLOCKS)
    source = start(SoundCardSource("pulse", "pulse", RATE, 1, BLOCK, gen, stream_factory=factory), running)
    try:
        out, inp = factory.latest("output"), factory.latest("input")
        outs = []
        for _ in range(LEAD_BLOCKS + 2):
            outs.append(out.pump())
            inp.pump()
        assert all(np.abs(o).max() > 0.1 for o in outs[1:LEAD_BLOCKS])
        assert all(np.all(o == 0.0) for o in outs[LEAD_BLOCKS:])
        assert source.counters.output_underflows == 2
        assert source.ring.written == (LEAD_BLOCKS + 2) * BLOCK  # capture goes on regardless
    finally:
        gen.release.set()


@pytest.mark.parametrize("applied", [True, False], ids=["mute-applied", "mute-and-unmute-together"])
def test_mute_plays_zeros_at_once_and_unmute_fades_in_on_time(fake_sd, running, applied):
    factory = Factory()
    gen = Generator(Tone(1000.0, -6.0), RATE)
    source = start(SoundCardSource("pulse", "pulse", RATE, 1, BLOCK, gen, stream_factory=factory), running)
    out = factory.latest("output")
    blocks = [pump_out(source, out)]
    source.mute()
    assert source.muted
    blocks.append(pump_out(source, out))
    assert np.all(blocks[-1] == 0.0)  # at once, though the ring held tone rendered before the mute
    if applied:  # the producer muted the generator before the unmute (else both come at once)
        blocks.append(pump_out(source, out))
        assert wait_for(lambda: gen.silent)
    source.unmute()
    for _ in range(3 * LEAD_BLOCKS):
        blocks.append(pump_out(source, out))
    x = np.concatenate(blocks)[:, 0]
    back = source._sound_from  # the producer's unmute: the first frame of the fade-in
    assert BLOCK < back <= len(blocks) * BLOCK
    assert np.all(x[BLOCK:back] == 0.0)
    # From there on, what a generator muted and unmuted at that sample plays: a fade-in from 0,
    # with the oscillator's time run on (the tone is where it would have been, not delayed).
    reference = Generator(Tone(1000.0, -6.0), RATE)
    head = reference.render(back)
    reference.mute()
    reference.unmute()
    tail = reference.render(len(x) - back)[:, 0].astype(np.float32)
    np.testing.assert_allclose(x[:BLOCK], head[:BLOCK, 0], rtol=0, atol=1e-6)
    np.testing.assert_allclose(x[back:], tail, rtol=0, atol=1e-6)
    assert x[back] == 0.0 and abs(x[back + gen.ramp_frames:]).max() > 0.49
    assert source.counters.output_underflows == 0


def pump_out(source, out):
    """One output callback, once the producer has the block ready."""
    assert wait_for(lambda: source._out_ring.written - source._played >= BLOCK)
    return out.pump()


@pytest.fixture
def clock(monkeypatch):
    """The callbacks' clock, set by the test."""
    now = [100.0]
    monkeypatch.setattr(soundcard, "_now", lambda: now[0])
    return now


def test_drive_at_maps_captured_frames_through_clock_and_latency(fake_sd, running, clock):
    factory = Factory()
    gen = Generator(Tone(1000.0, -6.0), RATE, ramp_s=0.01)  # 480 frames of fade-in
    source = start(SoundCardSource("pulse", "pulse", RATE, 1, BLOCK, gen, stream_factory=factory), running)
    assert source.drive_at(0) is None  # no callback yet
    factory.latest("output").pump()  # played frame 0 leaves the card 0.02 s after t = 100
    factory.latest("input").pump()  # captured frame 0 was sampled 0.01 s before t = 100
    # captured frame F was sampled at 100 - 0.01 + F/48000, when played frame F - 1440 left
    assert source.drive_at(1439) is None  # the first played sample has not come back yet
    assert source.drive_at(1440 + 100) == Drive((1000.0,), False, None)  # still fading in
    assert source.drive_at(1440 + 480) == Drive((1000.0,), True, None)
    clock[0] = 100.5  # the input started half a second after the output
    factory.latest("input").pump()  # captured frames 256.. sampled from 100.49 s
    assert source.drive_at(BLOCK) == Drive((1000.0,), True, None)


def test_drive_at_follows_a_sweep(fake_sd, running, clock):
    factory = Factory()
    sweep = Sweep((500.0, 1000.0, 1500.0), -6.0, dwell_s=0.1, settle_s=0.02)
    gen = Generator(sweep, RATE)
    source = start(SoundCardSource("pulse", "pulse", RATE, 1, BLOCK, gen, stream_factory=factory), running)
    factory.latest("output").pump()
    factory.latest("input").pump()
    step_len = int(0.1 * RATE)
    drive = source.drive_at(1440 + step_len + 10)
    assert drive.step == 1 and not drive.settled and drive.tones_hz == (1000.0,)
    assert source.drive_at(1440 + step_len + int(0.05 * RATE)) == Drive((1000.0,), True, 1)


def test_input_only_has_no_drive(fake_sd, running):
    factory = Factory()
    source = start(SoundCardSource("pulse", rate_hz=RATE, stream_factory=factory), running)
    factory.latest("input").pump()
    assert source.drive_at(10_000) is None
    assert source.output_channels == 0


# -- live changes, handed to the producer thread ----------------------------------------------------

LAG = 1440  # FakeStream latencies: captured frame F is played frame F - LAG (0.01 s + 0.02 s at 48 kHz)


class Loop:
    """Pumps output then input, the clock moving one block each time; the input hears the output
    LAG frames late, so captured frame F holds played frame F - LAG, as drive_at assumes."""

    def __init__(self, source, factory, clock):
        self.source, self.clock = source, clock
        self.out, self.inp = factory.latest("output"), factory.latest("input")
        self.played = np.zeros((LAG, self.out.channels), dtype=np.float32)

    def run(self, blocks):
        for _ in range(blocks):
            self.clock[0] += BLOCK / RATE
            self.played = np.concatenate([self.played, pump_out(self.source, self.out)])
            k = self.source.ring.written
            self.inp.pump(self.played[k:k + BLOCK, : self.inp.channels].copy())

    @property
    def output(self):
        return self.played[LAG:, 0].astype(np.float64)


def switch_points(source, old, new):
    """(c, i): renderer samples where the producer began the change and where the new signal began."""
    segments = [(start, signal, full) for start, signal, _, full in source._timeline]
    i = next(start for start, signal, _ in segments if signal == new)
    c = max(start for start, signal, full in segments if signal == old and not full and start < i)
    return c, i


def test_set_signal_fades_over_to_the_new_tone_without_a_click(fake_sd, running, clock):
    factory = Factory()
    old, new = Tone(1000.0, -6.0), Tone(3000.0, -6.0)
    gen = Generator(old, RATE)  # 10 ms fades: R = 480 frames
    source = start(SoundCardSource("pulse", "pulse", RATE, 1, BLOCK, gen, stream_factory=factory), running)
    loop = Loop(source, factory, clock)
    loop.run(8)
    source.set_signal(new)  # from this thread while the producer renders: the GUI's place
    loop.run(48)
    x = loop.output
    c, i = switch_points(source, old, new)
    r = gen.ramp_frames
    # The producer applies the change at the next block it renders: past what was played, at
    # most LEAD_BLOCKS blocks ahead; the fade out from full gain lasts R samples.
    assert 8 * BLOCK <= c <= (8 + LEAD_BLOCKS) * BLOCK and c % BLOCK == 0
    assert i - c == r and gen.signal == new
    # Exactly what one generator makes when changed at sample c (its ramps, its phases).
    reference = Generator(old, RATE)
    expected = np.concatenate([reference.render(c), (reference.change(new), reference.render(len(x) - c))[1]])
    np.testing.assert_allclose(x, expected[:, 0], rtol=0, atol=1e-6)  # float32 output
    # Independent checks. The tone after the fade-in is 3000 Hz, before the change 1000 Hz: peak
    # of a Hann periodogram zero-padded 8x (scipy.signal.periodogram as the reference), within
    # 1 Hz; the old tone is gone (> 100 dB down: Hann sidelobes 2000 Hz off are far lower).
    for part, f, other in ((x[i + r:], 3000.0, 1000.0), (x[:c], 1000.0, 3000.0)):
        freqs, power = scipy.signal.periodogram(part, RATE, window="hann", nfft=8 * len(part))
        assert abs(freqs[np.argmax(power)] - f) < 1.0
        assert power[np.argmin(abs(freqs - other))] < 1e-10 * power.max()
    # No click: a step between samples never exceeds the steepest slope of A*g(n)*cos(wn + p),
    # |d/dn| <= A*(w + max|g'|) with w = 2*pi*f/fs and max|g'| = pi/(2R) for the raised-cosine
    # gain 0.5 - 0.5*cos(pi*n/R) (calculus; mean value theorem for the discrete step).
    a = 10 ** (-6 / 20)
    bound = a * (2 * np.pi * 3000.0 / RATE + np.pi / (2 * r)) + 1e-6
    assert np.abs(np.diff(x)).max() <= bound
    assert x[i - 1] == 0.0 and x[i] == 0.0  # out, then in: the two fades meet at silence
    assert np.abs(x).max() <= a + 1e-6


def test_drive_at_reports_the_old_tones_before_the_switch_and_the_new_after(fake_sd, running, clock):
    factory = Factory()
    old, new = TwoTone(700.0, 1900.0, -6.0), TwoTone(1000.0, 2500.0, -6.0)
    gen = Generator(old, RATE)
    source = start(SoundCardSource("pulse", "pulse", RATE, 1, BLOCK, gen, stream_factory=factory), running)
    engine = LiveEngine(source, TwoToneMeasurement(), {"tones": [700.0, 1900.0]})  # stepped by hand
    loop = Loop(source, factory, clock)
    loop.run(40)
    before = engine.step()
    source.set_signal(new)
    loop.run(40)
    after = engine.step()
    c, i = switch_points(source, old, new)
    r = gen.ramp_frames
    old_tones, new_tones = (700.0, 1900.0), (1000.0, 2500.0)
    # Captured frame F played renderer sample F - LAG; a few frames off each edge (int rounding).
    assert source.drive_at(LAG + c - 5) == Drive(old_tones, True, None)
    assert source.drive_at(LAG + c + 5) == Drive(old_tones, False, None)  # fading out
    assert source.drive_at(LAG + i - 5) == Drive(old_tones, False, None)
    assert source.drive_at(LAG + i + 5) == Drive(new_tones, False, None)  # fading in
    assert source.drive_at(LAG + i + r + 5) == Drive(new_tones, True, None)
    assert source.drive_at(source.ring.written - 1) == Drive(new_tones, True, None)
    # The readouts measure the tones that were in the window: the engine takes them from drive_at.
    assert before.frame - engine.nfft > LAG + gen.ramp_frames and before.frame < LAG + c
    assert before.result["tone_hz"] == pytest.approx(old_tones, abs=1.0), before.error
    assert after.frame - engine.nfft > LAG + i + r
    assert after.result["tone_hz"] == pytest.approx(new_tones, abs=1.0), after.error


def test_a_sweep_set_live_is_dated_from_its_own_start(fake_sd, running, clock):
    factory = Factory()
    gen = Generator(Tone(1000.0, -6.0), RATE)
    source = start(SoundCardSource("pulse", "pulse", RATE, 1, BLOCK, gen, stream_factory=factory), running)
    loop = Loop(source, factory, clock)
    loop.run(4)
    sweep = Sweep((500.0, 1500.0), -6.0, dwell_s=0.05, settle_s=0.01)
    source.set_signal(sweep)
    loop.run(40)
    _, i = switch_points(source, Tone(1000.0, -6.0), sweep)
    dwell = int(0.05 * RATE)
    assert gen.sweep_plan.start_sample == i
    assert source.drive_at(LAG + i + dwell + 5) == Drive((1500.0,), False, 1)  # step 1 settling
    assert source.drive_at(LAG + i + dwell + int(0.02 * RATE)) == Drive((1500.0,), True, 1)
    assert source.drive_at(LAG + i - 5).tones_hz == (1000.0,)


def test_mute_is_dated_for_drive_at(fake_sd, running, clock):
    factory = Factory()
    gen = Generator(Tone(1000.0, -6.0), RATE)
    source = start(SoundCardSource("pulse", "pulse", RATE, 1, BLOCK, gen, stream_factory=factory), running)
    loop = Loop(source, factory, clock)
    loop.run(8)
    source.mute()
    loop.run(8)
    source.unmute()
    loop.run(16)
    back = source._sound_from
    starts = [(start, full) for start, _, _, full in source._timeline]
    muted_at = starts[-3][0]
    assert starts[-3:] == [(muted_at, False), (back, False), (back + gen.ramp_frames, True)]
    assert source.drive_at(LAG + muted_at - 5).settled and not source.drive_at(LAG + muted_at + 5).settled
    assert not source.drive_at(LAG + back + 5).settled  # fading in
    assert source.drive_at(LAG + back + gen.ramp_frames + 5) == Drive((1000.0,), True, None)


def test_set_playing_fades_out_and_in_and_keeps_a_change_made_during_the_fade(fake_sd, running):
    factory = Factory()
    old, new = Tone(1000.0, -6.0), Tone(2000.0, -6.0)
    gen = Generator(old, RATE, ramp_s=0.1)  # 4800-frame fades: many blocks long
    source = start(SoundCardSource("pulse", "pulse", RATE, 1, BLOCK, gen, stream_factory=factory), running)
    out = factory.latest("output")
    blocks = [pump_out(source, out) for _ in range(24)]  # past the fade-in
    source.set_signal(new)
    blocks += [pump_out(source, out) for _ in range(2)]
    assert wait_for(lambda: source._applied_signal is not None)  # the change is fading the old tone out...
    source.set_playing(False)  # ...when the output is faded out: Generator.stop would drop it
    blocks += [pump_out(source, out) for _ in range(40)]
    assert not source.playing and np.all(blocks[-1] == 0.0) and gen.silent
    source.set_playing(True)
    blocks += [pump_out(source, out) for _ in range(40)]
    assert gen.signal == new
    x = np.concatenate(blocks)[:, 0]
    tail = x[-8192:]
    freqs, power = scipy.signal.periodogram(tail, RATE, window="hann", nfft=8 * len(tail))
    assert abs(freqs[np.argmax(power)] - 2000.0) < 1.0
    a = 10 ** (-6 / 20)
    assert np.abs(np.diff(x)).max() <= a * (2 * np.pi * 2000.0 / RATE + np.pi / (2 * gen.ramp_frames)) + 1e-6
    assert source.counters.output_underflows == 0


def test_a_change_of_output_channels_is_refused_in_one_line(fake_sd, running):
    factory = Factory()
    gen = Generator(Tone(1000.0, -6.0), RATE)
    source = start(SoundCardSource("pulse", "pulse", RATE, 1, BLOCK, gen, stream_factory=factory), running)
    with pytest.raises(SoundCardError) as err:
        source.set_signal(Quadrature(1000.0, -6.0))
    assert str(err.value) == ("Quadrature plays on 2 output channels, the Tone playing on 1: the output "
                              "channel count cannot change while the sound card plays; reopen it")
    with pytest.raises(GeneratorError, match="Nyquist"):
        source.set_signal(Tone(30000.0, -6.0))  # checked in the caller's thread
    assert source._want_signal is None  # nothing was handed over
    out = factory.latest("output")
    for _ in range(3 * LEAD_BLOCKS):
        pump_out(source, out)
    assert gen.signal == Tone(1000.0, -6.0)

    stereo = Generator(Quadrature(1000.0, -6.0), RATE, channels=2)
    source = start(SoundCardSource("pulse", "pulse", RATE, 1, BLOCK, stereo, stream_factory=Factory()), running)
    with pytest.raises(SoundCardError, match=r"^Tone plays on 1 output channel, the Quadrature playing on 2: "):
        source.set_signal(Tone(1000.0, -6.0))
    source.set_signal(Quadrature(1500.0, -6.0))  # same channels: live

    class Plain:
        channels, rate_hz = 1, RATE

        def render_into(self, out):
            out[...] = 0.0

    plain = SoundCardSource("pulse", "pulse", RATE, 1, BLOCK, Plain(), stream_factory=Factory())
    with pytest.raises(SoundCardError, match=r"^the sound card 'pulse' -> 'pulse' plays no generator .*it cannot "
                                             r"change the signal live$"):
        plain.set_signal(Tone(1000.0, -6.0))


def test_the_output_callback_never_touches_the_requests_or_a_lock(fake_sd, running):
    # Structure: the callbacks (and the ring methods they call) name only these attributes: not
    # the wanted settings, the renderer, the timeline or any lock. A new name fails here.
    allowed_out = {"_calls", "output_underflow", "counters", "output_underflows", "_played", "_now",
                   "_out_mark", "_out_ring", "read", "fill", "_sound_from"}
    allowed_in = {"_calls", "input_overflow", "counters", "input_overflows", "ring", "written", "_now",
                  "_in_mark", "write"}
    assert set(SoundCardSource._output_callback.__code__.co_names) <= allowed_out
    assert set(SoundCardSource._input_callback.__code__.co_names) <= allowed_in
    assert set(FrameRing.read.__code__.co_names) <= {"written", "capacity", "np", "empty", "channels", "_buf",
                                                     "dtype", "min"}
    # Behaviour: with the producer stuck inside the renderer, a change and a mute posted, and the
    # state lock held by another thread, the callback still returns at once; the only functions it
    # calls are the ring's read (and its min), the clock and ndarray.fill (sys.setprofile reports
    # every Python and C function called).
    factory = Factory()
    gen = StallingGenerator(Tone(1000.0, -6.0), RATE, allowed=LEAD_BLOCKS + 1)
    source = start(SoundCardSource("pulse", "pulse", RATE, 1, BLOCK, gen, stream_factory=factory), running)
    callback = factory.latest("output").kwargs["callback"]
    outdata = np.zeros((BLOCK, 1), dtype=np.float32)
    status = FakeStatus()
    holding, release = threading.Event(), threading.Event()

    def hold_state_lock():
        with source._state_lock:
            holding.set()
            release.wait(10.0)

    holder = threading.Thread(target=hold_state_lock, daemon=True)
    holder.start()
    try:
        assert holding.wait(5.0)
        callback(outdata, BLOCK, None, status)
        assert wait_for(lambda: gen.allowed <= 0)  # the producer now waits inside render_into
        source.set_signal(Tone(2000.0, -6.0))
        source.mute()
        seen = set()

        def profile(frame, event, arg):
            if event == "call":
                seen.add(frame.f_code.co_qualname)
            elif event == "c_call":
                seen.add(arg.__name__)

        for _ in range(3):
            began = time.perf_counter()
            sys.setprofile(profile)
            try:
                callback(outdata, BLOCK, None, status)
            finally:
                sys.setprofile(None)
            assert time.perf_counter() - began < 0.5
        assert np.all(outdata == 0.0)  # muted at once
        # (besides the callback itself, the fake status's truth test and setprofile switching off)
        assert seen <= {"SoundCardSource._output_callback", "FakeStatus.__bool__", "FrameRing.read", "min",
                        "monotonic", "fill", "setprofile"}, seen
        assert "FrameRing.read" in seen and "fill" in seen
    finally:
        release.set()
        gen.release.set()
        holder.join(5.0)


# -- device loss ----------------------------------------------------------------------------------


class PumpedStream(FakeStream):
    """Calls back every 2 ms from its own thread, like PortAudio, until it vanishes."""

    def start(self):
        super().start()
        self._running = True
        self._thread = threading.Thread(target=self._run, daemon=True)
        self._thread.start()

    def _run(self):
        while self._running:
            self.pump()
            time.sleep(0.002)

    def vanish(self, finish=True):
        """The device goes away: callbacks stop; PortAudio may or may not report the end."""
        self._running = False
        self._thread.join(1.0)
        if finish:
            self.active = False
            self.kwargs["finished_callback"]()

    def close(self):
        self._running = False
        super().close()


@pytest.mark.parametrize("kind", ["input", "output"])
@pytest.mark.parametrize("finish", [True, False], ids=["stream-ended", "callbacks-stopped"])
def test_a_lost_device_is_retried_and_resumes(fake_sd, running, monkeypatch, finish, kind):
    monkeypatch.setattr(SoundCardSource, "STALL_S", 0.3)
    factory = Factory(PumpedStream)
    gen = Generator(Tone(1000.0, -6.0), RATE)
    source = start(SoundCardSource("pulse", "pulse", RATE, 1, BLOCK, gen, stream_factory=factory,
                                   retry_s=0.2), running)
    assert wait_for(lambda: source.ring.written > 20 * BLOCK)
    factory.available = False
    lost = factory.latest(kind)
    lost.vanish(finish)
    assert wait_for(lambda: source.state == LOST_STATE)
    assert wait_for(lambda: all(s.closed for s in factory.streams))  # both directions closed
    assert source.outages == 1
    attempts = factory.attempts
    assert wait_for(lambda: factory.attempts >= attempts + 2)  # it keeps trying, about every retry_s
    frozen = source.ring.written
    factory.available = True
    assert wait_for(lambda: source.state == "running")
    assert len(factory.streams) == 4 and source.outages == 1 and source.lost_s > 0.3
    assert wait_for(lambda: source.ring.written > frozen + 20 * BLOCK)  # captures again
    assert "1 outage" in source.describe()


def test_retry_interval_is_respected(fake_sd, running, monkeypatch):
    factory = Factory(PumpedStream)
    source = start(SoundCardSource("pulse", rate_hz=RATE, stream_factory=factory, retry_s=0.25), running)
    assert wait_for(lambda: source.ring.written > 0)
    factory.available = False
    factory.latest("input").vanish()
    assert wait_for(lambda: source.state == LOST_STATE)
    first = factory.attempts
    time.sleep(1.0)
    assert 2 <= factory.attempts - first <= 5  # about one try per 0.25 s, not a busy loop


# -- devices and settings -------------------------------------------------------------------------


def test_device_by_index_name_part_and_exact_name(fake_sd):
    assert find_device(fake_sd, 1, "input")["name"] == "USB Audio Device"
    assert find_device(fake_sd, "1", "input")["name"] == "USB Audio Device"
    assert find_device(fake_sd, "codec", "input")["index"] == 0
    assert find_device(fake_sd, "pulse", "input")["index"] == 2  # exact beats 'pulse monitor'
    assert find_device(fake_sd, "hdmi", "output")["index"] == 4
    assert find_device(fake_sd, None, "output")["index"] == 2


def test_an_ambiguous_name_lists_the_candidates_with_indices(fake_sd):
    with pytest.raises(SoundCardError) as err:
        find_device(fake_sd, "usb audio", "input")
    message = str(err.value)
    assert "ambiguous" in message and "0 'USB Audio CODEC'" in message and "1 'USB Audio Device'" in message
    assert "\n" not in message


def test_no_match_lists_every_device_of_that_kind(fake_sd):
    with pytest.raises(SoundCardError, match=r"no output device matches 'usb device'.*2 'pulse', 4 'HDMI out'"):
        SoundCardSource("pulse", "usb device", RATE, renderer=Generator(Tone(1000.0, -6.0), RATE),
                        stream_factory=Factory())
    with pytest.raises(SoundCardError, match=r"no input device 4;"):
        SoundCardSource(4, stream_factory=Factory())


@pytest.mark.parametrize("rate", [22050, 32000, 48000.5, True])
def test_a_rate_outside_the_list_is_one_line(fake_sd, rate):
    with pytest.raises(SoundCardError) as err:
        SoundCardSource("pulse", rate_hz=rate, stream_factory=Factory())
    assert str(err.value) == f"sample rate {rate!r} Hz is not allowed; allowed: 44100, 48000, 96000, 192000 Hz"


def test_a_rate_the_device_lacks_names_what_it_offers(fake_sd):
    with pytest.raises(SoundCardError) as err:
        SoundCardSource("codec", rate_hz=192000, input_channels=2, stream_factory=Factory())
    assert str(err.value) == (
        "device 'USB Audio CODEC' cannot record 2 channels at 192000 Hz; "
        "it offers up to 2 input channels at 44100, 48000 Hz"
    )


def test_too_many_channels_is_one_line(fake_sd):
    with pytest.raises(SoundCardError, match=r"^device 'USB Audio Device' cannot record 2 channels at 48000 Hz; "
                                             r"it offers up to 1 input channel at 44100, 48000, 96000, 192000 Hz$"):
        SoundCardSource("usb audio device", input_channels=2, stream_factory=Factory())
    with pytest.raises(SoundCardError, match="input channels = 3 is not allowed; allowed: 1 or 2"):
        SoundCardSource("pulse", input_channels=3, stream_factory=Factory())


def test_a_busy_device_is_one_line_from_start(fake_sd):
    factory = Factory()
    factory.available = False
    source = SoundCardSource("pulse", stream_factory=factory)
    with pytest.raises(SoundCardError) as err:
        source.start()
    assert str(err.value) == ("cannot open sound card 'pulse' at 48000 Hz: Error opening Stream: Device "
                              "unavailable [PaErrorCode -9985] (is another program using it?)")


def test_renderer_rate_must_match(fake_sd):
    with pytest.raises(SoundCardError, match="renderer runs at 44100 Hz, the sound card at 48000 Hz"):
        SoundCardSource("pulse", "pulse", 48000, renderer=Generator(Tone(1000.0, -6.0), 44100),
                        stream_factory=Factory())


# -- PortAudio missing ----------------------------------------------------------------------------


def test_sounddevice_not_installed_is_one_line(monkeypatch):
    monkeypatch.setitem(sys.modules, "sounddevice", None)  # makes `import sounddevice` raise ImportError
    with pytest.raises(SoundCardError) as err:
        SoundCardSource("pulse")
    assert str(err.value) == MISSING_PORTAUDIO


def test_portaudio_library_missing_is_one_line(monkeypatch):
    real_import = builtins.__import__

    def no_portaudio(name, *args, **kwargs):
        if name == "sounddevice":
            raise OSError("PortAudio library not found")
        return real_import(name, *args, **kwargs)

    monkeypatch.delitem(sys.modules, "sounddevice", raising=False)
    monkeypatch.setattr(builtins, "__import__", no_portaudio)
    with pytest.raises(SoundCardError) as err:
        soundcard_devices.list_devices()
    assert str(err.value) == "PortAudio is missing: apt-get install libportaudio2 (and pip install sounddevice)"


# -- rtanalyzer devices ---------------------------------------------------------------------------


def test_devices_command_lists_and_marks_defaults(fake_sd, capsys, cautions_already_shown):
    from rtanalyzer.cli.main import main

    assert main(["devices"]) == 0
    lines = capsys.readouterr().out.splitlines()
    assert lines[0].split()[:4] == ["in", "out", "index", "name"]
    pulse = next(line for line in lines if " pulse " in line)
    assert pulse.split()[:8] == ["*", "*", "2", "pulse", "Fake", "API", "32", "32"]
    assert pulse.endswith("48000 Hz")
    assert len([line for line in lines if "USB Audio" in line]) == 2


def test_devices_command_json(fake_sd, capsys, cautions_already_shown):
    import json

    from rtanalyzer.cli.main import main

    assert main(["devices", "--json"]) == 0
    devices = json.loads(capsys.readouterr().out)
    assert [d["name"] for d in devices] == [name for name, *_ in DEVICES]
    assert devices[2]["default_input"] and devices[2]["default_output"]
    assert devices[4] == {"index": 4, "name": "HDMI out", "hostapi": "Fake API", "max_input_channels": 0,
                          "max_output_channels": 8, "default_samplerate_hz": 48000.0,
                          "default_input": False, "default_output": False}


def test_devices_command_without_portaudio_is_one_line(monkeypatch, capsys, cautions_already_shown):
    from rtanalyzer.cli.main import main

    monkeypatch.setitem(sys.modules, "sounddevice", None)
    assert main(["devices"]) == 2
    assert capsys.readouterr().err == f"rtanalyzer: error: {MISSING_PORTAUDIO}\n"


def test_devices_command_with_no_devices_says_so(monkeypatch, capsys, cautions_already_shown):
    from rtanalyzer.cli.main import main

    monkeypatch.setattr(soundcard_devices, "load_sounddevice", lambda: FakeSd([], default=(-1, -1)))
    assert main(["devices"]) == 0
    assert capsys.readouterr().out == "no sound devices found (no sound card, or no sound server running?)\n"
    with pytest.raises(SoundCardError, match=r"^there is no default input device; input devices: none"):
        SoundCardSource(stream_factory=Factory())
