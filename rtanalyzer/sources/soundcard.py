"""A sound card as a live source: capture into the ring, and optionally drive the exciter in full duplex.

The PortAudio callback only copies: captured frames into ``ring``, and output frames out of a
second, preallocated ring that a producer thread keeps a few blocks ahead by calling the
renderer (a :class:`~rtanalyzer.generator.Generator`). The callback never renders, allocates
sample arrays, logs, or takes a lock — the contract in python-sounddevice's ``Stream``
documentation. A supervisor thread watches the stream; when the device goes away it keeps the
source alive, says so in ``state`` and reopens the device once a second until it is back.

sounddevice (and with it PortAudio) is imported only when a device is looked up or opened.
"""

from __future__ import annotations

import threading
import time
from typing import Any, Callable

import numpy as np

from rtanalyzer.errors import RtaError
from rtanalyzer.generator.errors import GeneratorError
from rtanalyzer.generator.generator import Generator
from rtanalyzer.generator.signals import Sweep
from rtanalyzer.sources.drive import tones_of
from rtanalyzer.sources.live import Drive, LiveSource
from rtanalyzer.sources.ring import FrameRing

ALLOWED_RATES_HZ = (44100, 48000, 96000, 192000)
DEFAULT_BLOCK = 1024
BLOCK_RANGE = (64, 16384)
LEAD_BLOCKS = 4  # output rendered ahead of the callback: room for a late producer wake-up
LOST_STATE = "device lost — retrying"
MISSING_PORTAUDIO = "PortAudio is missing: apt-get install libportaudio2 (and pip install sounddevice)"


class SoundCardError(RtaError):
    """A sound card that cannot be used as asked: PortAudio missing, no such device, bad setting."""


def _sounddevice():
    """Import sounddevice, or raise the one-line error saying what to install."""
    try:
        import sounddevice
    except (ImportError, OSError):  # OSError: the module loads but finds no PortAudio library
        raise SoundCardError(MISSING_PORTAUDIO) from None
    return sounddevice


def _one_line(exc: BaseException) -> str:
    return " ".join(str(exc).split()).rstrip(".") or type(exc).__name__


# -- devices ------------------------------------------------------------------------------------


def list_devices() -> list[dict[str, Any]]:
    """Every PortAudio device with its host API, channel counts, default rate and default marks.

    Returns
    -------
    list of dict
        Keys ``index``, ``name``, ``hostapi``, ``max_input_channels``, ``max_output_channels``,
        ``default_samplerate_hz``, ``default_input``, ``default_output``.

    Raises
    ------
    SoundCardError
        PortAudio is missing or cannot list its devices.
    """
    sd = _sounddevice()
    devices = _query(sd)
    default_in, default_out = _defaults(sd)
    listing = []
    for d in devices:
        try:
            hostapi = str(sd.query_hostapis(d["hostapi"])["name"])
        except Exception:  # a host API PortAudio cannot describe: still list the device
            hostapi = "?"
        listing.append({
            "index": int(d["index"]),
            "name": str(d["name"]),
            "hostapi": hostapi,
            "max_input_channels": int(d["max_input_channels"]),
            "max_output_channels": int(d["max_output_channels"]),
            "default_samplerate_hz": float(d["default_samplerate"]),
            "default_input": d["index"] == default_in,
            "default_output": d["index"] == default_out,
        })
    return listing


def _query(sd) -> list[dict]:
    try:
        return [dict(d) for d in sd.query_devices()]
    except Exception as exc:  # PortAudioError, or a broken host API
        raise SoundCardError(f"cannot list the sound devices: {_one_line(exc)}") from None


def _defaults(sd) -> tuple[int, int]:
    try:
        pair = sd.default.device
        return int(pair[0]), int(pair[1])
    except Exception:  # no defaults configured
        return -1, -1


def _channel_key(kind: str) -> str:
    return "max_input_channels" if kind == "input" else "max_output_channels"


def _candidates(devices: list[dict], kind: str) -> str:
    key = _channel_key(kind)
    found = [f"{d['index']} '{d['name']}'" for d in devices if d[key] > 0]
    return ", ".join(found) if found else "none (no sound card or sound server?)"


def find_device(sd, spec: int | str | None, kind: str) -> dict:
    """The device ``spec`` names for ``kind`` ("input" or "output").

    Parameters
    ----------
    sd : module
        sounddevice (or a stand-in offering ``query_devices`` and ``default``).
    spec : int, str or None
        An index, a part of a name (case-insensitive; an exact name wins), or None for the
        default device.

    Returns
    -------
    dict
        The device's description from ``sd.query_devices``.

    Raises
    ------
    SoundCardError
        No such device (the line lists the ``kind`` devices with their indices), or a name that
        matches several (the line lists those).
    """
    devices = _query(sd)
    key = _channel_key(kind)
    if spec is None:
        index = _defaults(sd)[0 if kind == "input" else 1]
        if not 0 <= index < len(devices) or devices[index][key] < 1:
            raise SoundCardError(f"there is no default {kind} device; {kind} devices: {_candidates(devices, kind)}")
        return devices[index]
    if isinstance(spec, (int, np.integer)) or str(spec).strip().isdigit():
        index = int(spec)
        if not 0 <= index < len(devices) or devices[index][key] < 1:
            raise SoundCardError(f"there is no {kind} device {index}; {kind} devices: {_candidates(devices, kind)}")
        return devices[index]
    text = str(spec).strip().lower()
    matches = [d for d in devices if d[key] > 0 and text in str(d["name"]).lower()]
    exact = [d for d in matches if str(d["name"]).lower() == text]
    if len(exact) == 1 or len(matches) == 1:
        return (exact or matches)[0]
    if not matches:
        raise SoundCardError(f"no {kind} device matches '{spec}'; {kind} devices: {_candidates(devices, kind)}")
    raise SoundCardError(
        f"{kind} device name '{spec}' is ambiguous: it matches {_candidates(matches, kind)}; "
        "give the index or more of the name"
    )


def check_device(sd, device: dict, kind: str, channels: int, rate_hz: int) -> None:
    """Raise a one-line SoundCardError unless ``device`` takes ``channels`` at ``rate_hz``."""
    check = sd.check_input_settings if kind == "input" else sd.check_output_settings

    def works(rate: int, count: int) -> bool:
        try:
            check(device=device["index"], channels=count, samplerate=rate, dtype="float32")
        except (sd.PortAudioError, ValueError):
            return False
        return True

    if works(rate_hz, channels):
        return
    most = int(device[_channel_key(kind)])
    rates = [r for r in ALLOWED_RATES_HZ if most > 0 and works(r, min(channels, most))]
    offers = f"{', '.join(map(str, rates))} Hz" if rates else "none of the rates " + ", ".join(map(str, ALLOWED_RATES_HZ))
    verb = "record" if kind == "input" else "play"
    raise SoundCardError(
        f"device '{device['name']}' cannot {verb} {channels} channel{'s' if channels > 1 else ''} at "
        f"{rate_hz} Hz; it offers up to {most} {kind} channel{'s' if most != 1 else ''} at {offers}"
    )


# -- the source ---------------------------------------------------------------------------------


class SoundCardSource(LiveSource):
    """Capture from a sound card, and play a renderer's output on another (or the same) one.

    Parameters
    ----------
    input_device, output_device : int, str or None
        Index or part of a name (see :func:`find_device`); None picks the default device.
        ``output_device`` is used only with a ``renderer``.
    rate_hz : int
        44100, 48000, 96000 or 192000.
    channels : int
        Input channels, 1 or 2 (which one to analyse is the engine's business).
    block : int
        Frames per callback, 64 to 16384.
    renderer : object with ``render_into(out)``, optional
        Fills a float64 array (frames, channels) with the next output samples, e.g. a
        :class:`Generator`; its ``channels`` attribute (default 1) sets the output channels.
        None: input only.
    stream_factory : callable, optional
        Makes the stream; called like ``sounddevice.Stream`` (``sounddevice.InputStream``
        without a renderer) with ``device``, ``samplerate``, ``blocksize``, ``channels``,
        ``dtype``, ``callback`` and ``finished_callback``. Tests pass a fake.
    retry_s : float
        Seconds between attempts to reopen a lost device.

    Raises
    ------
    SoundCardError
        PortAudio missing, no such or an ambiguous device, a rate, channel count or block the
        device or this class does not take. Opening errors come from :meth:`start`.

    Notes
    -----
    ``outages`` counts the times the device was lost; ``lost_s`` adds up how long. While lost,
    ``state`` reads ``"device lost — retrying"`` and the ring simply stops growing.
    """

    kind = "sound card"
    #: Seconds without a callback after which a running stream counts as lost; a fresh one
    #: gets longer, since PortAudio over a sound server can take a second or two to start.
    STALL_S = 2.0
    STARTUP_S = 6.0
    CHECK_S = 0.1

    def __init__(self, input_device: int | str | None = None, output_device: int | str | None = None,
                 rate_hz: int = 48000, channels: int = 1, block: int = DEFAULT_BLOCK, renderer=None,
                 stream_factory: Callable[..., Any] | None = None, retry_s: float = 1.0) -> None:
        if isinstance(rate_hz, bool) or rate_hz not in ALLOWED_RATES_HZ:
            raise SoundCardError(f"sample rate {rate_hz!r} Hz is not allowed; allowed: "
                                 f"{', '.join(map(str, ALLOWED_RATES_HZ))} Hz")
        if isinstance(channels, bool) or channels not in (1, 2):
            raise SoundCardError(f"input channels = {channels!r} is not allowed; allowed: 1 or 2")
        if isinstance(block, bool) or not isinstance(block, (int, np.integer)) \
                or not BLOCK_RANGE[0] <= block <= BLOCK_RANGE[1]:
            raise SoundCardError(f"block = {block!r} frames is out of range; allowed: "
                                 f"{BLOCK_RANGE[0]} to {BLOCK_RANGE[1]}")
        if renderer is not None and not callable(getattr(renderer, "render_into", None)):
            raise SoundCardError(f"renderer {renderer!r} has no render_into(out); give a Generator or None")
        renderer_rate = getattr(renderer, "rate_hz", rate_hz)
        if renderer is not None and float(renderer_rate) != float(rate_hz):
            raise SoundCardError(f"the renderer runs at {float(renderer_rate):g} Hz, the sound card at {rate_hz} Hz; "
                                 "make them equal")
        self.block = int(block)
        self.renderer = renderer
        self.output_channels = int(getattr(renderer, "channels", 1)) if renderer is not None else 0
        self.retry_s = float(retry_s)
        self._specs = (input_device, output_device)
        self._factory = stream_factory
        super().__init__(rate_hz, channels, "sound card")
        self._in_info, self._out_info = self._resolve(_sounddevice())
        self.name = self._describe_devices()
        self.outages = 0
        self.lost_s = 0.0
        # Output side: the producer writes, the callback reads at `_played`; ints swap atomically.
        lead = LEAD_BLOCKS * self.block
        self._lead = lead
        self._out_ring = FrameRing(lead + 4 * self.block, max(1, self.output_channels)) if renderer else None
        self._played = 0
        self._muted = False
        self._callbacks = 0
        self._offset: int | None = None  # captured index minus played index, set by the callback
        self._latency_frames = 0
        self._gen_start = 0  # renderer sample of output frame 0, taken at the first start
        self._stream = None
        self._generation = 0
        self._finished_generation = -1
        self._halt = threading.Event()
        self._threads: list[threading.Thread] = []
        self._lost_at = 0.0
        self._last_try = 0.0

    # -- devices ----------------------------------------------------------------------------------

    def _resolve(self, sd) -> tuple[dict, dict | None]:
        """Look the devices up by what the user gave (again after a loss: indices may move)."""
        rate = int(self.rate_hz)
        in_info = find_device(sd, self._specs[0], "input")
        check_device(sd, in_info, "input", self.channels, rate)
        out_info = None
        if self.renderer is not None:
            out_info = find_device(sd, self._specs[1], "output")
            check_device(sd, out_info, "output", self.output_channels, rate)
        return in_info, out_info

    def _describe_devices(self) -> str:
        if self._out_info is None:
            return f"sound card '{self._in_info['name']}'"
        return f"sound card '{self._in_info['name']}' -> '{self._out_info['name']}'"

    # -- control ----------------------------------------------------------------------------------

    @property
    def muted(self) -> bool:
        return self._muted

    def mute(self) -> None:
        """Play zeros from the next callback on (the renderer's time runs on)."""
        self._muted = True

    def unmute(self) -> None:
        self._muted = False

    def start(self) -> None:
        """Open the device and start capturing (and playing).

        Raises
        ------
        SoundCardError
            The device cannot be opened (busy, gone, refused the settings).
        """
        if self._threads:
            return
        if self._out_ring is not None:
            if self._out_ring.written == 0:
                self._gen_start = getattr(self.renderer, "sample_index", 0)
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
        stream, self._stream = self._stream, None
        if stream is not None:
            _close_quietly(stream, timeout)
        self._set_state("stopped")

    def describe(self) -> str:
        text = super().describe()
        if self.renderer is not None:
            text += f", {self.output_channels} ch out"
        return text + (f", {self.outages} outage{'s' if self.outages != 1 else ''}" if self.outages else "")

    # -- the stream -------------------------------------------------------------------------------

    def _open(self) -> None:
        sd = _sounddevice()
        self._in_info, self._out_info = self._resolve(sd)
        self._offset = None
        self._generation += 1
        generation = self._generation

        def finished() -> None:  # PortAudio ended the stream: ours to reopen unless we stopped it
            self._finished_generation = generation

        duplex = self.renderer is not None
        factory = self._factory or (sd.Stream if duplex else sd.InputStream)
        kwargs = dict(samplerate=self.rate_hz, blocksize=self.block, dtype="float32", finished_callback=finished)
        if duplex:
            kwargs.update(device=(self._in_info["index"], self._out_info["index"]),
                          channels=(self.channels, self.output_channels), callback=self._duplex_callback)
        else:
            kwargs.update(device=self._in_info["index"], channels=self.channels, callback=self._input_callback)
        stream = None
        try:
            stream = factory(**kwargs)
            stream.start()
        except (sd.PortAudioError, OSError, ValueError) as exc:
            if stream is not None:
                _close_quietly(stream, 1.0)
            raise SoundCardError(f"cannot open {self._describe_devices()} at {self.rate_hz:g} Hz: "
                                 f"{_one_line(exc)} (is another program using it?)") from None
        latency = getattr(stream, "latency", 0.0)
        seconds = sum(latency) if isinstance(latency, (tuple, list)) else float(latency)
        self._latency_frames = int(round(seconds * self.rate_hz))
        self._stream = stream

    def _duplex_callback(self, indata, outdata, frames, time_info, status) -> None:
        # Copies and int updates only: no rendering, no allocation of arrays, no lock, no logging.
        self._callbacks += 1
        if status:
            if status.input_overflow:
                self.counters.input_overflows += 1
            if status.output_underflow:
                self.counters.output_underflows += 1
        self._offset = self.ring.written - self._played
        self.ring.write(indata)
        if self._out_ring.read(self._played, frames, outdata) is None:
            outdata.fill(0.0)
            self.counters.output_underflows += 1
            return
        self._played += frames
        if self._muted:
            outdata.fill(0.0)

    def _input_callback(self, indata, frames, time_info, status) -> None:
        self._callbacks += 1
        if status and status.input_overflow:
            self.counters.input_overflows += 1
        self.ring.write(indata)

    # -- threads ----------------------------------------------------------------------------------

    def _top_up(self, buffer: np.ndarray) -> None:
        while self._out_ring.written - self._played < self._lead:
            self.renderer.render_into(buffer)
            self._out_ring.write(buffer)

    def _produce(self) -> None:
        """Keep the output ring LEAD_BLOCKS ahead of the callback."""
        buffer = np.empty((self.block, self.output_channels))
        nap = self.block / self.rate_hz / 4
        while not self._halt.wait(nap):
            try:
                self._top_up(buffer)
            except Exception as exc:  # a renderer fault: the callback now plays silence
                self._set_state(f"output stopped: {_one_line(exc)}")
                return

    def _supervise(self) -> None:
        """Notice a lost device (stream ended by PortAudio, or callbacks stopped) and reopen it."""
        seen, since, flowing = self._callbacks, time.monotonic(), False
        while not self._halt.wait(self.CHECK_S):
            now = time.monotonic()
            if self._stream is None:
                if now - self._last_try >= self.retry_s:
                    self._last_try = now
                    if self._reopen():
                        seen, since, flowing = self._callbacks, time.monotonic(), False
                continue
            if self._callbacks != seen:
                seen, since, flowing = self._callbacks, now, True
            limit = self.STALL_S if flowing else self.STARTUP_S
            ended = self._finished_generation == self._generation or not getattr(self._stream, "active", True)
            if ended or now - since > limit:
                self._lose(now)

    def _lose(self, now: float) -> None:
        stream, self._stream = self._stream, None
        self.outages += 1
        self._lost_at = self._last_try = now
        self._set_state(LOST_STATE)
        _close_quietly(stream, 1.0)

    def _reopen(self) -> bool:
        try:
            self._open()
        except RtaError:
            _refresh_portaudio(_sounddevice())  # a replugged card shows only in a fresh device list
            return False
        self.lost_s += time.monotonic() - self._lost_at
        self._set_state("running")
        return True

    # -- what drives the exciter ------------------------------------------------------------------

    def drive_at(self, frame: int) -> Drive | None:
        """Tones the generator was playing when captured frame ``frame`` left the output.

        Maps the frame through the newest callback's offset between captured and played frames
        and the stream's reported latency (input + output). None without a Generator, before
        the first callback, or before the generator's first sample reached the input.
        """
        gen, offset = self.renderer, self._offset
        if not isinstance(gen, Generator) or offset is None:
            return None
        sample = self._gen_start + frame - offset - self._latency_frames
        if sample < self._gen_start:
            return None
        signal = gen.signal
        if isinstance(signal, Sweep):
            try:
                step, frequency, settled = gen.step_at(sample)
            except GeneratorError:  # before the sweep now playing began
                return None
            return Drive((frequency,), settled, step)
        return Drive(tones_of(signal)[0], sample >= self._gen_start + gen.ramp_frames)


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

    Restarting PortAudio would also end any other stream of this process; the source only
    does it while its own device is lost.
    """
    terminate, initialize = getattr(sd, "_terminate", None), getattr(sd, "_initialize", None)
    if terminate is None or initialize is None:
        return
    try:
        terminate()
        initialize()
    except Exception:  # PortAudio refused; the next retry tries again
        pass
