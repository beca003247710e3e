"""A sound card as a live source: capture into the ring while a renderer drives the exciter.

Playing and recording run at once, each on its own PortAudio stream. A single duplex stream
was tried first: over a sound server's ALSA plugin (PulseAudio's ``pulse``, PipeWire) PortAudio
inserted frames into the capture every one or two periods (tones read 0.15 % low with
sidebands 25 dB down), while separate streams stayed sample-continuous. The analysis never
needs the two directions sample-locked; only :meth:`SoundCardSource.drive_at` relates them,
through the callbacks' clock and the reported latencies.

The callbacks only copy: captured frames into ``ring``, output frames out of a preallocated
ring that a producer thread keeps a few blocks ahead by calling the renderer (a
:class:`~rtanalyzer.generator.Generator`). No callback renders, allocates sample arrays, logs
or takes a lock — the contract in python-sounddevice's ``Stream`` documentation.

The generator is not thread-safe, so other threads never call it. :meth:`SoundCardSource.set_signal`,
:meth:`~SoundCardSource.mute`, :meth:`~SoundCardSource.unmute` and
:meth:`~SoundCardSource.set_playing` only store what is wanted (one attribute each, the newest
wins); the producer compares it with what it last applied and calls the generator's
``change``/``mute``/``unmute``/``stop``/``start`` between two blocks it renders, so the
generator's fades stay click-free. The producer also keeps a short timeline of what the
generator played from which sample, for :meth:`SoundCardSource.drive_at`. The output callback
reads neither: muting reaches it as one integer, the first output frame it may play. A supervisor
thread watches both streams; when the device goes away it keeps the source alive, says so in
``state`` and reopens the device every ``retry_s`` until it is back.

sounddevice (and with it PortAudio) is imported only when a device is looked up or opened.
"""

from __future__ import annotations

import sys
import threading
import time
from typing import Any, Callable

import numpy as np

from rtanalyzer.errors import RtaError
from rtanalyzer.generator.errors import GeneratorError
from rtanalyzer.generator.generator import Generator, PreparedSignal
from rtanalyzer.generator.signals import Quadrature
from rtanalyzer.sources import soundcard_devices as devices
from rtanalyzer.sources.drive import tones_of
from rtanalyzer.sources.live import Drive, LiveSource
from rtanalyzer.sources.ring import FrameRing
from rtanalyzer.sources.soundcard_devices import ALLOWED_RATES_HZ, SoundCardError, one_line

DEFAULT_BLOCK = 1024
BLOCK_RANGE = (64, 16384)
LEAD_BLOCKS = 4  # output rendered ahead of the callback: room for a late producer wake-up
LOST_STATE = "device lost — retrying"
_now = time.monotonic  # the callbacks' clock; a name of its own so tests can set the time
_SILENT = sys.maxsize  # `_sound_from` while muted: no output frame may sound
TIMELINE_LENGTH = 64  # segments of the generator's history kept for drive_at (two per change)


def _default_factory(kind: str, **kwargs):
    sd = devices.load_sounddevice()
    return (sd.InputStream if kind == "input" else sd.OutputStream)(**kwargs)


class SoundCardSource(LiveSource):
    """Capture from a sound card, and play a renderer's output on the same or another one.

    Parameters
    ----------
    input_device, output_device : int, str or None
        Index or part of a name (see :func:`~rtanalyzer.sources.soundcard_devices.find_device`);
        None picks the default device. ``output_device`` is used only with a ``renderer``.
    rate_hz : int
        44100, 48000, 96000 or 192000, for both directions.
    input_channels : int
        1 or 2, kept as ``channels`` (which one to analyse is the engine's business).
    block : int
        Frames per callback, 64 to 16384.
    renderer : object with ``render_into(out)``, optional
        Fills a float64 array (frames, channels) in place with the next output samples, e.g. a
        :class:`Generator`; its ``channels`` attribute (default 1) sets the output channels and
        its ``rate_hz``, if any, must equal ``rate_hz``. None: input only.
    stream_factory : callable, optional
        ``stream_factory(kind, **kwargs)`` with kind "input" or "output" makes a stream as
        ``sounddevice.InputStream`` / ``OutputStream`` would from ``device``, ``samplerate``,
        ``blocksize``, ``channels``, ``dtype``, ``callback`` and ``finished_callback``; it needs
        ``start()``, ``close()``, ``latency`` and ``active``. Tests pass a fake.
    retry_s : float
        Seconds between attempts to reopen a lost device.

    Raises
    ------
    SoundCardError
        PortAudio missing, no such or an ambiguous device, a rate, channel count or block the
        device or this class does not take. Opening errors come from :meth:`start`.

    Notes
    -----
    ``counters`` counts the drivers' input overflows and output underflows, plus every block
    the output ring could not supply (played as zeros). ``outages`` counts the times the
    device was lost and ``lost_s`` adds up how long; while lost, ``state`` reads
    ``"device lost — retrying"`` and the ring simply stops growing.

    While it runs, :meth:`set_signal`, :meth:`mute`, :meth:`unmute` and :meth:`set_playing`
    may be called from any thread (the window's): the producer thread carries them out through
    the generator's fades, and :meth:`drive_at` dates them. Only a change of output channel
    count needs the device reopened.
    """

    kind = "sound card"
    #: Seconds without a callback after which a running stream counts as lost; a fresh one
    #: gets longer, since PortAudio over a sound server can take two seconds to start.
    STALL_S = 2.0
    STARTUP_S = 6.0
    CHECK_S = 0.1

    def __init__(self, input_device: int | str | None = None, output_device: int | str | None = None,
                 rate_hz: int = 48000, input_channels: int = 1, block: int = DEFAULT_BLOCK, renderer=None,
                 stream_factory: Callable[..., Any] | None = None, retry_s: float = 1.0) -> None:
        if isinstance(rate_hz, bool) or rate_hz not in ALLOWED_RATES_HZ:
            raise SoundCardError(f"sample rate {rate_hz!r} Hz is not allowed; allowed: "
                                 f"{', '.join(map(str, ALLOWED_RATES_HZ))} Hz")
        if isinstance(input_channels, bool) or input_channels not in (1, 2):
            raise SoundCardError(f"input channels = {input_channels!r} is not allowed; allowed: 1 or 2")
        if isinstance(block, bool) or not isinstance(block, (int, np.integer)) \
                or not BLOCK_RANGE[0] <= block <= BLOCK_RANGE[1]:
            raise SoundCardError(f"block = {block!r} frames is out of range; allowed: "
                                 f"{BLOCK_RANGE[0]} to {BLOCK_RANGE[1]}")
        if renderer is not None and not callable(getattr(renderer, "render_into", None)):
            raise SoundCardError(f"renderer {renderer!r} has no render_into(out); give a Generator or None")
        renderer_rate = float(getattr(renderer, "rate_hz", rate_hz))
        if renderer_rate != float(rate_hz):
            raise SoundCardError(f"the renderer runs at {renderer_rate:g} Hz, the sound card at {rate_hz} Hz; "
                                 "make them equal")
        super().__init__(rate_hz, input_channels, "sound card")
        self.block = int(block)
        self.renderer = renderer
        self.output_channels = int(getattr(renderer, "channels", 1)) if renderer is not None else 0
        self.retry_s = float(retry_s)
        self._specs = (input_device, output_device)
        self._factory = stream_factory or _default_factory
        self._in_info, self._out_info = self._resolve(devices.load_sounddevice())
        self.name = self._describe_devices()
        self.outages = 0
        self.lost_s = 0.0
        # The producer writes the output ring, the output callback reads it at `_played`.
        self._lead = LEAD_BLOCKS * self.block
        self._out_ring = FrameRing(self._lead + 4 * self.block, self.output_channels) if renderer else None
        self._played = 0
        self._gen_start = 0  # renderer sample of output frame 0, taken at the first start
        # Wanted by the control calls (any thread; plain stores, the newest wins):
        self._want_signal: PreparedSignal | None = None
        self._want_muted = False
        self._want_playing = True
        self._signal_set = getattr(renderer, "signal", None)  # the signal last asked for
        # Applied by the producer thread (only it reads the wanted values and calls the renderer):
        self._applied_signal: PreparedSignal | None = None
        self._gen_muted = False
        self._gen_playing = True
        # Read by the output callback: output frames before this index play as zeros.
        self._sound_from = 0
        # (first renderer sample, signal, sweep plan or None, at full level) segments, oldest
        # first; replaced whole by the producer, read by drive_at.
        self._timeline: tuple[tuple[int, Any, Any, bool], ...] = ()
        # Set by the callbacks (plain attribute stores, atomic under the GIL):
        self._calls = {"input": 0, "output": 0}
        self._in_mark: tuple[int, float] | None = None  # (captured index, clock) of the newest block
        self._out_mark: tuple[int, float] | None = None  # (played index, clock)
        self._latency_s = {"input": 0.0, "output": 0.0}
        self._streams: dict[str, Any] = {}
        self._ended: set[str] = set()  # streams PortAudio finished (or we closed)
        self._generation = 0  # counts opens, so a late finish of an old stream is ignored
        self._halt = threading.Event()
        self._threads: list[threading.Thread] = []
        self._lost_at = 0.0
        self._last_try = 0.0

    # -- devices ----------------------------------------------------------------------------------

    def _resolve(self, sd) -> tuple[dict, dict | None]:
        """Look the devices up by what the user gave (again after a loss: indices may move)."""
        rate = int(self.rate_hz)
        in_info = devices.find_device(sd, self._specs[0], "input")
        devices.check_device(sd, in_info, "input", self.channels, rate)
        out_info = None
        if self.renderer is not None:
            out_info = devices.find_device(sd, self._specs[1], "output")
            devices.check_device(sd, out_info, "output", self.output_channels, rate)
        return in_info, out_info

    def _describe_devices(self) -> str:
        if self._out_info is None:
            return f"sound card '{self._in_info['name']}'"
        return f"sound card '{self._in_info['name']}' -> '{self._out_info['name']}'"

    # -- control ----------------------------------------------------------------------------------

    @property
    def muted(self) -> bool:
        return self._want_muted

    @property
    def playing(self) -> bool:
        return self._want_playing

    def mute(self) -> None:
        """Play zeros from the next output callback on (the renderer's time runs on).

        Any thread. The producer then mutes the generator too, between two blocks.
        """
        self._want_muted = True
        self._sound_from = _SILENT

    def unmute(self) -> None:
        """Sound again: the producer unmutes the generator, which fades in from the next block it
        renders (about ``LEAD_BLOCKS`` blocks later); frames rendered before stay zeros.

        Any thread. A renderer without ``unmute`` comes back at full level, without a fade.
        """
        self._want_muted = False

    def set_playing(self, playing: bool) -> None:
        """Fade the generator out (False) or back in (True) through its ramp, without closing the device.

        Any thread; the producer applies it between two blocks.

        Raises
        ------
        SoundCardError
            If the renderer is not a :class:`Generator`.
        """
        self._generator("fade the output in or out")
        self._want_playing = bool(playing)

    def set_signal(self, signal) -> None:
        """Play ``signal`` instead, through the generator's fade out and in, without reopening the device.

        Any thread. The signal is checked and prepared here (for a multitone, its peak is found
        in the caller's thread); the producer switches between two blocks it renders, so the
        old signal starts fading out about ``LEAD_BLOCKS`` blocks later. :meth:`drive_at`
        reports the new tones from the first frame the generator rendered of them. A second
        call before the first took effect replaces it.

        Raises
        ------
        SoundCardError
            If the renderer is not a :class:`Generator`, or ``signal`` needs another number of
            output channels than the signal asked for before (a :class:`Quadrature` pair needs
            two, any other signal one): the device must then be reopened with a new source.
        GeneratorError
            If ``signal`` cannot be played at this rate.
        """
        gen = self._generator("change the signal live")
        need, have = _channels_needed(signal), _channels_needed(self._signal_set)
        if need != have:
            raise SoundCardError(
                f"{type(signal).__name__} plays on {need} output channel{'s' if need != 1 else ''}, the "
                f"{type(self._signal_set).__name__} playing on {have}: the output channel count cannot "
                "change while the sound card plays; reopen it"
            )
        self._want_signal = gen.prepare(signal)
        self._signal_set = signal

    def _generator(self, what: str) -> Generator:
        if not isinstance(self.renderer, Generator):
            raise SoundCardError(f"the {self.name} plays no generator ({self.renderer!r}); "
                                 f"it cannot {what}")
        return self.renderer

    def start(self) -> None:
        """Open the device(s) and start capturing (and playing).

        Raises
        ------
        SoundCardError
            A device cannot be opened (busy, gone, refused the settings).
        """
        if self._threads:
            return
        if self._out_ring is not None:
            if self._out_ring.written == 0:
                self._gen_start = getattr(self.renderer, "sample_index", 0)
                if isinstance(self.renderer, Generator):
                    self._note(self.renderer.signal_start)
            self._top_up(np.empty((self.block, self.output_channels)))  # no underflow at the start
        self._open()
        self._set_state("running")
        self._halt.clear()
        targets = [self._supervise] + ([self._produce] if self.renderer is not None else [])
        self._threads = [threading.Thread(target=t, name=f"rtanalyzer sound card {t.__name__[1:]}", daemon=True)
                         for t in targets]
        for thread in self._threads:
            thread.start()

    def stop(self, timeout: float = 2.0) -> None:
        self._halt.set()
        for thread in self._threads:
            thread.join(timeout)
        self._threads = []
        self._close_streams(timeout)
        self._set_state("stopped")

    def describe(self) -> str:
        text = super().describe()
        if self.renderer is not None:
            text += f", {self.output_channels} ch out"
        return text + (f", {self.outages} outage{'s' if self.outages != 1 else ''}" if self.outages else "")

    # -- streams and callbacks --------------------------------------------------------------------

    def _open(self) -> None:
        sd = devices.load_sounddevice()
        self._in_info, self._out_info = self._resolve(sd)
        self._in_mark = self._out_mark = None
        self._ended = set()
        self._generation += 1
        plan = [("input", self._in_info, self.channels, self._input_callback)]
        if self.renderer is not None:
            plan.insert(0, ("output", self._out_info, self.output_channels, self._output_callback))
        try:
            for kind, info, channels, callback in plan:
                self._streams[kind] = self._factory(
                    kind, device=info["index"], samplerate=self.rate_hz, blocksize=self.block,
                    channels=channels, dtype="float32", callback=callback,
                    finished_callback=lambda kind=kind, g=self._generation: self._finished(kind, g),
                )
                self._streams[kind].start()
                self._latency_s[kind] = float(getattr(self._streams[kind], "latency", 0.0))
        except (sd.PortAudioError, OSError, ValueError) as exc:
            self._close_streams(1.0)
            raise SoundCardError(f"cannot open {self._describe_devices()} at {self.rate_hz:g} Hz: "
                                 f"{one_line(exc)} (is another program using it?)") from None

    def _finished(self, kind: str, generation: int) -> None:
        """PortAudio ended a stream; a late call for streams already replaced is ignored."""
        if generation == self._generation:
            self._ended.add(kind)

    def _close_streams(self, timeout: float) -> None:
        streams, self._streams = self._streams, {}
        for stream in streams.values():
            _close_quietly(stream, timeout)

    def _input_callback(self, indata, frames, time_info, status) -> None:
        # Copies and plain stores only: no rendering, no array allocation, no lock, no logging.
        self._calls["input"] += 1
        if status and status.input_overflow:
            self.counters.input_overflows += 1
        self._in_mark = (self.ring.written, _now())
        self.ring.write(indata)

    def _output_callback(self, outdata, frames, time_info, status) -> None:
        # Copies and plain loads/stores only; the wanted settings and the renderer are the producer's.
        self._calls["output"] += 1
        if status and status.output_underflow:
            self.counters.output_underflows += 1
        played = self._played
        self._out_mark = (played, _now())
        if self._out_ring.read(played, frames, outdata) is None:
            outdata.fill(0.0)
            self.counters.output_underflows += 1
            return
        self._played = played + frames
        quiet = self._sound_from - played  # muted, or rendered before an unmute took effect
        if quiet >= frames:
            outdata.fill(0.0)
        elif quiet > 0:
            outdata[:quiet].fill(0.0)

    # -- threads ----------------------------------------------------------------------------------

    def _top_up(self, buffer: np.ndarray) -> None:
        gen = self.renderer
        dated = isinstance(gen, Generator)
        while self._out_ring.written - self._played < self._lead:
            self._apply_requests()
            began = gen.signal_start if dated else 0
            gen.render_into(buffer)
            self._out_ring.write(buffer)
            if dated and gen.signal_start != began:  # a change took effect inside this block
                self._note(gen.signal_start)

    def _apply_requests(self) -> None:
        """Producer thread: carry out what the control calls asked for, before the next block.

        Order matters to the generator: a stop drops a change still fading out, so the change
        is made again after it; mute and stop go before a change (which then switches at once
        or when silent), start and unmute after it.
        """
        gen = self.renderer
        dated = isinstance(gen, Generator)
        muted, playing, wanted = self._want_muted, self._want_playing, self._want_signal
        # A mute and unmute between two looks leave the callback silenced all the same: mute the
        # generator too, so that it comes back through a fade-in rather than mid-waveform.
        silenced = self._sound_from == _SILENT
        moved = False
        if (muted or silenced) and not self._gen_muted:
            if dated:
                gen.mute()
            self._gen_muted = moved = True
        if dated and not playing and self._gen_playing:
            gen.stop()
            self._gen_playing, moved = False, True
            if self._applied_signal is not None and gen.signal is not self._applied_signal.signal:
                gen.change(self._applied_signal)  # stop dropped it while it was fading out
        if dated and wanted is not self._applied_signal:
            gen.change(wanted)
            self._applied_signal, moved = wanted, True
        if dated and playing and not self._gen_playing:
            gen.start()
            self._gen_playing, moved = True, True
        if not muted and self._gen_muted:
            if dated:
                gen.unmute()
            self._gen_muted, moved = False, True
            self._sound_from = self._out_ring.written  # the fade-in's first frame
            if self._want_muted:  # mute() came meanwhile and its _SILENT may have been overwritten
                self._sound_from = _SILENT
        if moved and dated:
            self._note(gen.sample_index)

    def _note(self, from_sample: int) -> None:
        """Producer thread: record what the generator plays from renderer sample ``from_sample`` on.

        Segments from ``from_sample`` on were predictions made earlier (a fade-in's end) and
        are replaced; the timeline is swapped whole, so drive_at sees the old or the new one.
        """
        gen = self.renderer
        steady = gen.steady_from
        signal, plan = gen.signal, gen.sweep_plan
        kept = [seg for seg in self._timeline if seg[0] < from_sample][-(TIMELINE_LENGTH - 2):]
        kept.append((from_sample, signal, plan, steady is not None and steady <= from_sample))
        if steady is not None and steady > from_sample:
            kept.append((steady, signal, plan, True))
        self._timeline = tuple(kept)

    def _produce(self) -> None:
        """Keep the output ring LEAD_BLOCKS ahead of the callback."""
        buffer = np.empty((self.block, self.output_channels))
        nap = self.block / self.rate_hz / 4
        while not self._halt.wait(nap):
            try:
                self._top_up(buffer)
            except Exception as exc:  # a renderer fault: the callback now plays silence
                self._set_state(f"output stopped: {one_line(exc)}")
                return

    def _supervise(self) -> None:
        """Notice a lost device (a stream ended by PortAudio, or callbacks stopped) and reopen it."""
        def fresh():  # calls seen, when they last moved, and whether they ever did
            moment = time.monotonic()
            return dict(self._calls), {k: moment for k in self._calls}, {k: False for k in self._calls}

        seen, since, flowing = fresh()
        while not self._halt.wait(self.CHECK_S):
            now = time.monotonic()
            if not self._streams:
                if now - self._last_try >= self.retry_s:
                    self._last_try = now
                    if self._reopen():
                        seen, since, flowing = fresh()
                continue
            stalled = False
            for kind in self._streams:
                if self._calls[kind] != seen[kind]:
                    seen[kind], since[kind] = self._calls[kind], now
                    flowing[kind] = True
                limit = self.STALL_S if flowing[kind] else self.STARTUP_S
                stalled = stalled or now - since[kind] > limit
            ended = bool(self._ended) or not all(getattr(s, "active", True) for s in self._streams.values())
            if ended or stalled:
                self._lose(now)

    def _lose(self, now: float) -> None:
        self.outages += 1
        self._lost_at = self._last_try = now
        self._set_state(LOST_STATE)
        self._close_streams(1.0)

    def _reopen(self) -> bool:
        try:
            self._open()
        except RtaError:
            _refresh_portaudio(devices.load_sounddevice())  # a replugged card shows only in a fresh list
            return False
        self.lost_s += time.monotonic() - self._lost_at
        self._set_state("running")
        return True

    # -- what drives the exciter ------------------------------------------------------------------

    def drive_at(self, frame: int) -> Drive | None:
        """Tones the generator was playing when captured frame ``frame`` was sampled.

        Dates the frame from the newest input callback (its clock time, less the reported input
        latency) and finds the output sample leaving the card then from the newest output
        callback (plus the reported output latency). Sound servers report latency loosely:
        through PulseAudio the estimate was seen 40 ms off. The tones are those the generator
        rendered for that sample, from the producer's timeline: after :meth:`set_signal`, the
        old ones up to the switch and the new ones after it. ``settled`` is False while a fade
        is under way, while muted and while faded out (the tones are still those set). None
        without a Generator, before both directions have run, before the generator's first
        sample was played, or for a sample older than the timeline remembers.
        """
        in_mark, out_mark, timeline = self._in_mark, self._out_mark, self._timeline
        if not isinstance(self.renderer, Generator) or in_mark is None or out_mark is None:
            return None
        sampled_at = in_mark[1] - self._latency_s["input"] + (frame - in_mark[0]) / self.rate_hz
        played = out_mark[0] + (sampled_at - out_mark[1] - self._latency_s["output"]) * self.rate_hz
        if played < 0:
            return None
        sample = self._gen_start + int(played)
        for start, signal, plan, full in reversed(timeline):
            if sample >= start:
                break
        else:
            return None
        if plan is not None:
            try:
                step, frequency, settled = plan.step_at(sample)
            except GeneratorError:  # before the sweep began
                return None
            return Drive((frequency,), full and settled, step)
        return Drive(tones_of(signal)[0], full)


def _channels_needed(signal) -> int:
    """Output channels a signal plays on: two for a quadrature pair (I left, Q right), else one."""
    return 2 if isinstance(signal, Quadrature) else 1


def _close_quietly(stream, timeout: float) -> None:
    """Close ``stream`` on a helper thread: closing a vanished device can hang inside PortAudio."""

    def close() -> None:
        try:
            stream.close()
        except Exception:  # the device is gone already; nothing left to release
            pass

    closer = threading.Thread(target=close, name="rtanalyzer sound card close", daemon=True)
    closer.start()
    closer.join(timeout)


def _refresh_portaudio(sd) -> None:
    """Make PortAudio enumerate the devices again (sounddevice has no public call for it).

    Restarting PortAudio would also end any other stream of this process; the source only does
    it while its own device is lost.
    """
    terminate, initialize = getattr(sd, "_terminate", None), getattr(sd, "_initialize", None)
    if terminate is None or initialize is None:
        return
    try:
        terminate()
        initialize()
    except Exception:  # PortAudio refused; the next retry tries again
        pass
