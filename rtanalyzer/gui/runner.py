"""The live session behind the window: build, start, rebuild and stop the engine; drain its queue.

The GUI thread never analyses. A QTimer drains the engine's readout queue, keeps the newest
readout of each tick (counting all, for the update rate) and hands it on; the plots' data is
prepared on the analysis thread by :class:`~rtanalyzer.gui.frames.DisplayPrep` and picked up
here. Rebuilding a session (stop, build, start) runs on a worker thread so the window stays
responsive; only the newest pending configuration is built.
"""

from __future__ import annotations

import queue
import threading
import time
from collections import deque

from PyQt6.QtCore import QObject, QTimer, pyqtSignal

from rtanalyzer.gui.frames import DisplayPrep
from rtanalyzer.live.engine import FILLING
from rtanalyzer.live.session import SessionConfig, build_engine

DRAIN_MS = 40  # 25 ticks/s: the queue is emptied at least as fast as readouts come
DISPLAY_RATES = (10.0, 15.0, 20.0)
#: Redraws per second. Under software OpenGL each redraw composes the whole window (about a
#: third of a core at 20/s on the development machine, see scripts/bench_gui.py); 15 is live
#: enough for trimming and leaves the analysis its core.
DEFAULT_DISPLAY_HZ = 15.0


class SessionRunner(QObject):
    """Owns the engine. Signals come on the GUI thread."""

    readout = pyqtSignal(object)  # the newest Readout of a tick
    frame = pyqtSignal(object)  # the newest DisplayFrame
    busy = pyqtSignal(bool, str)  # rebuilding?, what
    started = pyqtSignal(object)  # the new engine
    failed = pyqtSignal(str)  # a session could not be built or started
    _built = pyqtSignal(object, object, object)  # engine or None, prep, error text (worker -> GUI)

    def __init__(self, parent=None) -> None:
        super().__init__(parent)
        self.engine = None
        self.prep: DisplayPrep | None = None
        self.config: SessionConfig | None = None
        self.paused = False
        self.peak_hold = False
        self.display_hz = DEFAULT_DISPLAY_HZ
        self._last_shown = 0.0
        self._held = None  # the newest readout, not shown yet
        self._pending: SessionConfig | None = None
        self._worker: threading.Thread | None = None
        self._fresh = None  # the engine a worker just built (for stop() while it is in flight)
        self._closing = False
        self._started_at = time.monotonic()
        self._last_frame = None
        self._arrivals: deque[float] = deque(maxlen=200)
        self._built.connect(self._on_built)
        self.timer = QTimer(self)
        self.timer.setInterval(DRAIN_MS)
        self.timer.timeout.connect(self.drain)

    # -- lifecycle --------------------------------------------------------------------------------

    @property
    def rebuilding(self) -> bool:
        return self._worker is not None

    def start(self, config: SessionConfig) -> None:
        """Build and start a session for ``config`` (stopping the running one first)."""
        self.config = config
        if self._worker is not None:
            self._pending = config  # the newest wins; built when the current build is done
            return
        old, self.engine = self.engine, None
        self.prep = None
        self._last_frame = None
        self.busy.emit(True, "starting the session…")
        self._worker = threading.Thread(target=self._build, args=(old, config), name="rtanalyzer gui session",
                                        daemon=True)
        self._worker.start()

    def _build(self, old, config: SessionConfig) -> None:
        """Worker thread: stop the old engine, build and start the new one."""
        if old is not None:
            try:
                old.stop()
            except Exception:  # a failing stop must not prevent the new session
                pass
        engine, prep, error = None, None, None
        try:
            engine = build_engine(config)
            prep = DisplayPrep(engine.channel, engine.iq, engine.source.rate_hz)
            prep.peak_hold = self.peak_hold
            engine.on_readout = prep
            engine.start()
        except Exception as exc:  # RtaError and anything a device may throw: reported, not fatal
            if engine is not None:
                try:
                    engine.stop()
                except Exception:
                    pass
            engine, prep = None, None
            error = str(exc) or type(exc).__name__
        self._fresh = engine
        self._built.emit(engine, prep, error)

    def _on_built(self, engine, prep, error) -> None:
        self._worker = None
        self._fresh = None
        if self._closing:
            if engine is not None:
                engine.stop()
            return
        if self._pending is not None:
            pending, self._pending = self._pending, None
            if engine is not None:
                self.engine, self.prep = engine, prep
            self.start(pending)
            return
        self.busy.emit(False, "")
        if engine is None:
            self.failed.emit(error or "the session could not start")
            return
        self.engine, self.prep = engine, prep
        engine.pause(self.paused)
        self._arrivals.clear()
        self._started_at = time.monotonic()
        self.timer.start()
        self.started.emit(engine)

    def stop(self, timeout: float = 2.0) -> None:
        """Stop everything (window closing). Waits for a build in progress, then stops its engine."""
        self._closing = True
        self.timer.stop()
        worker = self._worker
        if worker is not None:
            worker.join(timeout + 5.0)
        self._pending = None
        fresh, self._fresh = self._fresh, None
        if fresh is not None and fresh is not self.engine:
            fresh.stop(timeout)
        if self.engine is not None:
            self.engine.stop(timeout)
            self.engine = None

    # -- controls ---------------------------------------------------------------------------------

    def set_paused(self, paused: bool) -> None:
        self.paused = paused
        if self.engine is not None:
            self.engine.pause(paused)

    def set_peak_hold(self, on: bool) -> None:
        self.peak_hold = on
        if self.prep is not None:
            self.prep.peak_hold = on
            self.prep.reset_peak()

    def reset_peak(self) -> None:
        if self.prep is not None:
            self.prep.reset_peak()

    def reset_best(self) -> None:
        if self.engine is not None:
            self.engine.reset_best()

    # -- the timer --------------------------------------------------------------------------------

    def drain(self) -> None:
        """Take every queued readout, keep the newest; at the display rate, hand it and the
        newest display frame on."""
        engine = self.engine
        if engine is None:
            return
        while True:
            try:
                readout = engine.readouts.get_nowait()
            except queue.Empty:
                break
            self._held = readout
            if readout.result is not None or readout.error != FILLING:
                self._arrivals.append(readout.t)  # the engine's own clock: the rate it makes them at
        now = time.monotonic()
        if now - self._last_shown < 1.0 / self.display_hz - DRAIN_MS / 2000.0:
            return
        self._last_shown = now
        prep = self.prep
        frame = prep.latest if prep is not None else None
        fresh = frame is not None and frame is not self._last_frame
        if self._held is not None:
            held, self._held = self._held, None
            # The figures and the spectrum they label come from one readout: the new frame's
            # (prepared just after its readout was queued, so at most one readout older).
            if fresh:
                held = frame.readout
            self.readout.emit(held)
        if fresh:
            self._last_frame = frame
            self.frame.emit(frame)

    def readouts_per_second(self) -> float:
        """Readouts that arrived over the last two seconds, per second."""
        now = time.monotonic()
        recent = [t for t in self._arrivals if now - t <= 2.0]
        if len(recent) < 2:
            return 0.0
        return (len(recent) - 1) / (recent[-1] - recent[0]) if recent[-1] > recent[0] else 0.0
