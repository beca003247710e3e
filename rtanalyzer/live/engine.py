"""The live analysis: a steady stream of readouts from whatever source fills the ring.

An analysis thread wakes at the update rate, feeds every new frame to the meters, takes the
newest window from the ring, pushes it into a running spectrum (one FFT per readout), and runs
the measurement plugin on that spectrum. Readouts go to a bounded queue (the oldest is dropped
when nobody reads) and to an optional callback.
"""

from __future__ import annotations

import inspect
import queue
import threading
import time
from dataclasses import dataclass, field
from typing import Any, Callable

import numpy as np

from rtanalyzer.dsp.running import RunningSpectrum
from rtanalyzer.dsp.spectrum import Spectrum
from rtanalyzer.errors import RtaError
from rtanalyzer.live.best import BestTracker
from rtanalyzer.live.meters import Meters
from rtanalyzer.measurements.base import Measurement
from rtanalyzer.measurements.calibration import CalibrationSet
from rtanalyzer.sources.capture import Signal
from rtanalyzer.sources.live import LiveSource

DEFAULT_UPDATE_HZ = 20.0
# Live windows aim for about a tenth of a second: short enough that a knob's effect shows
# within two readouts, long enough for bins of about 12 Hz at 48 kHz.
LIVE_WINDOW_S = 0.085
QUEUE_LENGTH = 64
# The readout's error until the ring holds a whole analysis window (audio may be arriving).
FILLING = "filling the analysis window"


def live_nfft(rate_hz: float, resolution_hz: float | None = None) -> int:
    """Window length for live readouts: a power of two near LIVE_WINDOW_S, or for a resolution."""
    seconds = LIVE_WINDOW_S if resolution_hz is None else 1.0 / resolution_hz
    return int(2 ** round(np.log2(max(seconds * rate_hz, 1024))))


@dataclass
class Readout:
    """One live readout: the measurement's JSON figures (or why there are none) and the meters."""

    measurement: str
    t: float  # time.monotonic() when it was made
    frame: int  # absolute index of the frame just past the analysed window
    result: dict[str, Any] | None
    error: str | None
    levels: dict[str, Any]
    xruns: dict[str, int]
    state: str
    best: dict[str, Any] | None = None
    sweep: dict[str, Any] | None = None
    timing: dict[str, float] = field(default_factory=dict)
    # For displays (not in the JSON): the averaged spectrum and the analysed window of frames.
    spectrum: Spectrum | None = None
    samples: np.ndarray | None = None

    def as_json(self) -> dict[str, Any]:
        """Flat JSON: the measurement's keys, plus time, levels, xruns and the engine's state."""
        out: dict[str, Any] = {"t": round(self.t, 4), "measurement": self.measurement}
        if self.result is not None:
            out.update(self.result)
        out.update(
            {
                "error": self.error,
                "levels": self.levels,
                "xruns": self.xruns,
                "source_state": self.state,
                "best": self.best,
            }
        )
        if self.sweep is not None:
            out["sweep"] = self.sweep
        return out


class LiveEngine:
    """Run a measurement plugin on a live source at a steady update rate.

    Parameters
    ----------
    source : LiveSource
    measurement : Measurement
    settings : dict
        The plugin's settings; tones are replaced by the source's drive when it knows them.
    channel, iq :
        Which view of the source's channels to analyse (as ``Capture.view``).
    update_hz : float
        Readouts per second.
    nfft : int, optional
        Analysis window; default from :func:`live_nfft`.
    averages : int
        Spectra averaged per readout (1: none, fastest response).
    calibration : CalibrationSet, optional
        Profiles taken out of every readout (checked against the measurement beforehand, see
        :func:`rtanalyzer.live.session.build_engine`); the result names them under "calibration".
    """

    def __init__(
        self,
        source: LiveSource,
        measurement: Measurement,
        settings: dict[str, Any],
        channel: int | None = None,
        iq: bool = False,
        update_hz: float = DEFAULT_UPDATE_HZ,
        nfft: int | None = None,
        averages: int = 1,
        on_readout: Callable[[Readout], None] | None = None,
        calibration: CalibrationSet | None = None,
    ) -> None:
        if not 0.5 <= update_hz <= 100:
            raise RtaError(f"update rate {update_hz:g} readouts/s is outside 0.5-100")
        if iq and source.channels < 2:
            raise RtaError(f"--iq needs two input channels; the {source.name} gives {source.channels}")
        number = 1 if channel is None else channel
        if not iq and not 1 <= number <= source.channels:
            raise RtaError(f"channel {number} does not exist; the {source.name} gives 1..{source.channels}")
        self.source = source
        self.measurement = measurement
        self.settings = dict(settings)
        self.iq = iq
        self.channel = number
        self.update_hz = update_hz
        self.nfft = nfft or live_nfft(source.rate_hz)
        self.spectrum = RunningSpectrum(self.nfft, source.rate_hz, iq, averages)
        self.meters = Meters(source.channels, source.rate_hz)
        self.best = BestTracker.for_measurement(measurement.name)
        self.readouts: queue.Queue[Readout] = queue.Queue(QUEUE_LENGTH)
        self.on_readout = on_readout
        self.calibration = calibration or CalibrationSet()
        self._takes_spectrum = "spectrum" in inspect.signature(measurement.measure).parameters
        self._read_to = 0
        self._last_window_end = None
        self._last_step = None
        self._last_tones: tuple[float, ...] | None = None
        self._thread: threading.Thread | None = None
        self._running = threading.Event()
        self._paused = threading.Event()

    # -- control --------------------------------------------------------------------------------

    def start(self) -> None:
        self.source.start()
        self._running.set()
        self._thread = threading.Thread(target=self._loop, name="rtanalyzer analysis", daemon=True)
        self._thread.start()

    def stop(self, timeout: float = 2.0) -> None:
        self._running.clear()
        if self._thread is not None:
            self._thread.join(timeout)
            self._thread = None
        self.source.stop(timeout)

    def pause(self, paused: bool) -> None:
        (self._paused.set if paused else self._paused.clear)()

    def reset_best(self) -> None:
        if self.best is not None:
            self.best.reset()

    def update_settings(self, **changes: Any) -> None:
        """Change plan settings between readouts (the running average starts afresh)."""
        self.settings = {**self.settings, **changes}
        self.spectrum.reset()

    # -- analysis -------------------------------------------------------------------------------

    def _loop(self) -> None:
        period = 1.0 / self.update_hz
        due = time.monotonic()
        while self._running.is_set():
            due += period
            if not self._paused.is_set():
                readout = self.step()
                if readout is not None:
                    self._deliver(readout)
            wait = due - time.monotonic()
            if wait > 0:
                time.sleep(wait)
            else:
                due = time.monotonic()  # fell behind: do not rush to catch up

    def _deliver(self, readout: Readout) -> None:
        if self.readouts.full():
            try:
                self.readouts.get_nowait()
            except queue.Empty:
                pass
        self.readouts.put_nowait(readout)
        if self.on_readout is not None:
            self.on_readout(readout)

    def _update_meters(self) -> None:
        ring = self.source.ring
        end = ring.written
        start = max(self._read_to, end - ring.capacity // 2)
        if end > start:
            frames = ring.read(start, end - start)
            if frames is not None:
                self.meters.update(frames)
        self._read_to = end

    def _signal(self, window: np.ndarray) -> Signal:
        if self.iq:
            z = window[:, 0].astype(np.float64) + 1j * window[:, 1].astype(np.float64)
            return Signal(z, self.source.rate_hz, any(self.meters.clipping()[:2]), "I/Q (1=I, 2=Q)")
        x = window[:, self.channel - 1].astype(np.float64)
        return Signal(x, self.source.rate_hz, self.meters.clipping()[self.channel - 1], f"channel {self.channel}")

    def _drive_settings(self, end: int) -> tuple[dict[str, Any], dict[str, Any] | None, bool]:
        """Settings with the tones the source was driving over the window, and sweep info."""
        first = self.source.drive_at(end - self.nfft)
        last = self.source.drive_at(end - 1)
        if last is None:
            return self.settings, None, True
        settings = dict(self.settings)
        if self.measurement.name == "sideband":
            settings["tone"] = list(last.tones_hz)
        elif self.measurement.name == "twotone" and len(last.tones_hz) == 2:
            settings["tones"] = list(last.tones_hz)
        sweep = None
        usable = True
        if last.step is None:
            # A steady signal changed, or faded in or out, within the window: its spectrum mixes
            # two drives. (All of it muted is one state: the figures say what the noise allows.)
            usable = first is not None and first.tones_hz == last.tones_hz and first.settled == last.settled
            if last.tones_hz != self._last_tones:
                self._last_tones = last.tones_hz
                self.spectrum.reset()  # do not average the old tones into the new figures
        else:
            # The whole window must lie in one step occurrence, past its settling time.
            usable = first is not None and first.step == last.step and first.settled
            if last.settled_from is not None:
                usable = usable and end - self.nfft >= last.settled_from
            sweep = {"step": last.step, "frequency_hz": last.tones_hz[0], "settled": usable}
        return settings, sweep, usable

    def step(self) -> Readout | None:
        """Make one readout now (the thread calls this; tests and benchmarks may too)."""
        started = time.perf_counter()
        self._update_meters()
        window, end = self.source.ring.latest(self.nfft)
        state = self.source.state
        xruns = self.source.counters.as_dict()
        if window is None:
            return Readout(self.measurement.name, time.monotonic(), end, None, FILLING, self.meters.as_dict(), xruns, state)
        settings, sweep, usable = self._drive_settings(end)
        if sweep is not None and sweep["step"] != self._last_step:
            self.spectrum.reset()  # a new step: do not average across tones
            self._last_step = sweep["step"]
        if not usable:
            return Readout(self.measurement.name, time.monotonic(), end, None, "settling", self.meters.as_dict(), xruns, state, sweep=sweep)
        signal = self.calibration.prepare(self._signal(window))
        hop = end - self._last_window_end if self._last_window_end is not None else None
        self._last_window_end = end
        spectrum = self.spectrum.push(signal.samples, hop)
        dsp_done = time.perf_counter()
        result, error = None, None
        try:
            kwargs = {"spectrum": spectrum} if self._takes_spectrum else {}
            result = self.calibration.finish(self.measurement.measure(signal, settings, **kwargs).to_json(), signal)
        except RtaError as exc:
            error = str(exc)
        if result is not None and self.best is not None and sweep is None:
            self.best.update(result)  # a sweep's steps are different tones, not trims of one
        finished = time.perf_counter()
        return Readout(
            self.measurement.name,
            time.monotonic(),
            end,
            result,
            error,
            self.meters.as_dict(),
            xruns,
            state,
            self.best.as_dict() if self.best is not None and sweep is None else None,
            sweep,
            {"dsp_s": dsp_done - started, "measure_s": finished - dsp_done},
            spectrum,
            window,
        )
