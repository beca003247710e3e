"""How fast the desktop window draws, and how much of a core its GUI thread takes (prints, does not assert).

1. Spectrum redraw rate: the real window (1600 x 1000) with the readouts paused, fed an
   8192-point spectrum as fast as the canvas will draw it (each draw asks for the next).
   Reported with only the spectrum changing, and with all four plots changing.
2. Live load: the window on the simulated bench at 20 readouts/s for a while; the GUI thread's
   CPU time (time.thread_time) over wall time is its share of one core. The whole process
   (analysis thread, bench, Mesa's rendering threads) is shown beside it.

Run under a virtual screen; without DISPLAY the script restarts itself under xvfb-run:

    python scripts/bench_gui.py [--seconds 10]
"""

from __future__ import annotations

import argparse
import os
import shutil
import sys
import tempfile
import time

import numpy as np


def _ensure_display() -> None:
    if os.environ.get("DISPLAY") or os.environ.get("QT_QPA_PLATFORM") == "offscreen":
        return
    runner = shutil.which("xvfb-run")
    if runner is None:
        sys.exit("no DISPLAY and no xvfb-run: apt-get install xvfb, or run on a desktop")
    os.execvp(runner, [runner, "-a", "-s", "-screen 0 1600x1000x24", sys.executable, *sys.argv])


def _gl_renderer() -> str:
    try:
        from vispy.gloo import gl

        return f"{gl.glGetParameter(gl.GL_RENDERER)} ({gl.glGetParameter(gl.GL_VERSION)})"
    except Exception as exc:  # the context may not be current here
        return f"unknown ({exc})"


def _wait(app, seconds: float, until=None) -> None:
    from PyQt6.QtCore import QEventLoop, QTimer

    loop = QEventLoop()
    QTimer.singleShot(int(seconds * 1000), loop.quit)
    if until is not None:
        poll = QTimer()
        poll.timeout.connect(lambda: until() and loop.quit())
        poll.start(20)
    loop.exec()


def _open_window(signal):
    from rtanalyzer.gui.app import application, prepare_session
    from rtanalyzer.gui.settings import WindowSettings
    from rtanalyzer.gui.window import MainWindow
    from rtanalyzer.live.session import SessionConfig

    app = application()
    settings = WindowSettings()
    config, generator, banner = prepare_session(SessionConfig(source="sim", signal=signal), None, frozenset(), settings)
    window = MainWindow(config, generator, settings, banner)
    window.resize(1600, 1000)
    window.show()
    _wait(app, 10.0, until=lambda: window.last_frame is not None)
    return app, window


def redraw_rate(points: int, seconds: float, all_plots: bool) -> tuple[float, float, tuple[int, int]]:
    """Frames per second and GUI-thread milliseconds per frame for a ``points``-point spectrum."""
    from PyQt6.QtCore import QEventLoop, QTimer

    from rtanalyzer.generator.signals import TwoTone

    app, window = _open_window(TwoTone(700.0, 1900.0, -6.0))
    window.set_paused(True)
    _wait(app, 0.3)
    base = window.last_frame
    rng = np.random.default_rng(1)
    freqs = np.linspace(0.0, base.rate_hz / 2.0, points).astype(np.float32)
    floor = -122.0 + 5.0 * rng.standard_normal((8, points)).astype(np.float32)
    for m in base.markers:
        floor[:, np.argmin(np.abs(freqs - m.frequency_hz))] = m.level_dbfs
    frames = [base.__class__(**{**base.__dict__, "frequencies_hz": freqs, "level_dbfs": floor[i]}) for i in range(8)]
    canvas = window.plots.canvas  # each spectrum draw asks for the next frame
    state = {"n": 0, "t0": 0.0, "cpu0": 0.0, "done": False}
    loop = QEventLoop()

    def next_frame(event=None) -> None:
        if state["done"]:
            return
        frame = frames[state["n"] % len(frames)]
        state["n"] += 1
        if state["n"] == 10:  # skip the first few (caches warming up)
            state["t0"], state["cpu0"] = time.perf_counter(), time.thread_time()
        if state["n"] > 10 and time.perf_counter() - state["t0"] > seconds:
            state["done"] = True
            loop.quit()
            return
        if all_plots:
            window.spectrum.show_frame(frame)
            window.waveform.show_frame(frame)
            window.pattern.show_frame(frame)
            window.plots.update()
            window.lower.update()
        else:
            window.spectrum.show_frame(frame)
            window.plots.update()

    canvas.events.draw.connect(lambda e: QTimer.singleShot(0, next_frame))
    QTimer.singleShot(0, next_frame)
    loop.exec()
    count = state["n"] - 11
    wall = time.perf_counter() - state["t0"]
    cpu = time.thread_time() - state["cpu0"]
    size = (canvas.native.width(), canvas.native.height())
    window.close()
    return count / wall, 1000.0 * cpu / max(count, 1), size


def bare_canvas_rate(points: int, seconds: float, size: tuple[int, int]) -> tuple[float, float]:
    """The same spectrum plot in a canvas of its own (no window around it to compose)."""
    from PyQt6.QtCore import QEventLoop, QTimer

    from rtanalyzer.gui.app import application
    from rtanalyzer.gui.frames import DisplayFrame
    from rtanalyzer.gui.plots import PlotCanvas, SpectrumPlot

    app = application()
    host = PlotCanvas()
    plot = host.add(SpectrumPlot(host))
    host.share_fonts()
    host.canvas.size = size
    host.canvas.show()
    _wait(app, 0.5)
    rng = np.random.default_rng(2)
    freqs = np.linspace(0.0, 24000.0, points).astype(np.float32)
    frames = [DisplayFrame(readout=None, frequencies_hz=freqs, rate_hz=48000.0, noise_floor_dbfs=-122.0,
                           analysis_bandwidth_hz=23.5,
                           level_dbfs=(-122.0 + 5.0 * rng.standard_normal(points)).astype(np.float32))
              for _ in range(8)]
    plot.set_range(x=(0, 24000), y=(-150, 10))
    state = {"n": 0, "t0": 0.0, "cpu0": 0.0}
    loop = QEventLoop()

    def next_frame() -> None:
        state["n"] += 1
        if state["n"] == 10:
            state["t0"], state["cpu0"] = time.perf_counter(), time.thread_time()
        if state["n"] > 10 and time.perf_counter() - state["t0"] > seconds:
            loop.quit()
            return
        plot.show_frame(frames[state["n"] % len(frames)])
        host.update()

    host.canvas.events.draw.connect(lambda e: QTimer.singleShot(0, next_frame))
    QTimer.singleShot(0, next_frame)
    loop.exec()
    count = state["n"] - 11
    wall = time.perf_counter() - state["t0"]
    rate = count / wall, 1000.0 * (time.thread_time() - state["cpu0"]) / max(count, 1)
    host.canvas.close()
    return rate


def live_load(seconds: float, signal, display_hz: float) -> dict:
    app, window = _open_window(signal)
    window.set_display_rate(display_hz)
    _wait(app, 1.0)
    count0 = window._readout_count
    wall0, gui0, proc0 = time.perf_counter(), time.thread_time(), time.process_time()
    _wait(app, seconds)
    wall = time.perf_counter() - wall0
    out = {
        "gui_core_share": (time.thread_time() - gui0) / wall,
        "process_core_share": (time.process_time() - proc0) / wall,
        "redraws_per_s": (window._readout_count - count0) / wall,
        "readouts_per_s": window.runner.readouts_per_second(),
        "points": int(window.last_frame.level_dbfs.size) if window.last_frame.level_dbfs is not None else 0,
        "renderer": _gl_renderer(),
    }
    window.close()
    return out


def _part(name: str, args: argparse.Namespace) -> None:
    """One measurement, in a process of its own (nothing left over from another)."""
    from rtanalyzer.generator.signals import Tone, TwoTone

    if name == "redraw":
        fps, ms, size = redraw_rate(args.points, 4.0, all_plots=False)
        print(f"spectrum redraw in the window, {args.points} points, canvas {size[0]}x{size[1]} px: "
              f"{fps:.1f} frames/s (target >= 30), GUI thread {ms:.1f} ms/frame")
    elif name == "bare":
        fps, ms = bare_canvas_rate(args.points, 4.0, (1203, 452))
        print(f"the same spectrum canvas alone (1203x452 px, no window to compose): {fps:.1f} frames/s, "
              f"GUI thread {ms:.1f} ms/frame")
    elif name == "all":
        fps, ms, _ = redraw_rate(args.points, 4.0, all_plots=True)
        print(f"spectrum and the three small plots redrawn each frame, {args.points}-point spectrum: "
              f"{fps:.1f} frames/s, GUI thread {ms:.1f} ms/frame")
    else:
        kind, hz = name.split("@")
        signal = Tone(1000.0, -6.0) if kind == "tone" else TwoTone(700.0, 1900.0, -6.0)
        r = live_load(args.seconds, signal, float(hz))
        print(f"live on the bench, {kind}, {r['points']} spectrum points, {r['readouts_per_s']:.1f} readouts/s, "
              f"{r['redraws_per_s']:.1f} redraws/s: GUI thread {100 * r['gui_core_share']:.1f} % of one core; "
              f"whole process {100 * r['process_core_share']:.0f} % of one core")
        if kind == "twotone" and hz.startswith("20"):
            print(f"OpenGL: {r['renderer']}")


def main() -> None:
    import subprocess

    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seconds", type=float, default=10.0, help="length of each live measurement")
    parser.add_argument("--points", type=int, default=8192, help="spectrum points for the redraw rate")
    parser.add_argument("--part", help=argparse.SUPPRESS)
    args = parser.parse_args()
    _ensure_display()
    os.environ.setdefault("RTANALYZER_CONFIG_DIR", tempfile.mkdtemp(prefix="rtanalyzer-bench-gui-"))
    os.environ.setdefault("QT_QPA_PLATFORM", "xcb")
    if args.part:
        _part(args.part, args)
        return
    from rtanalyzer.gui.runner import DISPLAY_RATES

    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    print(f"rtanalyzer desktop window benchmark · {os.cpu_count()} cores · load average {load:.2f} at the start")
    parts = ["redraw", "bare", "all"] + [f"{k}@{hz:g}" for k in ("tone", "twotone") for hz in DISPLAY_RATES]
    for part in parts:
        subprocess.run([sys.executable, __file__, "--part", part, "--seconds", str(args.seconds),
                        "--points", str(args.points)], check=False,
                       stderr=subprocess.DEVNULL)


if __name__ == "__main__":
    main()
