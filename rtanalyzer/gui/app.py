"""Start the desktop window: pick vispy's Qt backend, restore the settings, run until closed.

``rtanalyzer live`` calls :func:`display_problem` and then :func:`run_window`; when a display or
the GUI packages are missing it falls back to the terminal readout instead.
"""

from __future__ import annotations

import io
import os
import signal
import subprocess
import sys
import threading
from pathlib import Path

import vispy
from PyQt6.QtCore import QEventLoop, QTimer
from PyQt6.QtGui import QColor, QPalette
from PyQt6.QtWidgets import QApplication

from rtanalyzer.errors import RtaError
from rtanalyzer.gui import style

BACKEND = "pyqt6"
PROBE_TIMEOUT_S = 30.0
# Run in a child process: Qt aborts the whole process when it cannot open the display.
_PROBE = """
import sys
from PyQt6.QtWidgets import QApplication
from PyQt6.QtGui import QOffscreenSurface, QOpenGLContext
app = QApplication(sys.argv[:1])
context = QOpenGLContext()
surface = QOffscreenSurface()
surface.create()
if not (context.create() and context.makeCurrent(surface)):
    sys.exit("no OpenGL context could be made (install Mesa: libgl1-mesa-dri)")
print(app.platformName())
"""


def select_backend() -> None:
    """Tell vispy to draw through PyQt6 (once, before any canvas exists)."""
    vispy.use(app=BACKEND)


def display_problem() -> str | None:
    """Why no window can be opened here (one line), or None when one can."""
    if QApplication.instance() is not None:
        return None
    platform = os.environ.get("QT_QPA_PLATFORM", "")
    if sys.platform.startswith("linux") and not platform.startswith(("offscreen", "minimal", "vnc", "eglfs")):
        if not os.environ.get("DISPLAY") and not os.environ.get("WAYLAND_DISPLAY"):
            return "no display: DISPLAY is not set"
    try:
        probe = subprocess.run([sys.executable, "-c", _PROBE], capture_output=True, text=True,
                               timeout=PROBE_TIMEOUT_S)
    except (OSError, subprocess.TimeoutExpired) as exc:
        return f"the display could not be checked ({exc})"
    if probe.returncode != 0:
        lines = [line for line in probe.stderr.strip().splitlines() if line.strip()]
        return lines[-1] if lines else f"Qt could not open the display (exit status {probe.returncode})"
    return None


def _light_palette() -> QPalette:
    palette = QPalette()
    roles = {
        QPalette.ColorRole.Window: style.PAPER,
        QPalette.ColorRole.WindowText: style.INK,
        QPalette.ColorRole.Base: style.PLOT,
        QPalette.ColorRole.AlternateBase: style.PANEL,
        QPalette.ColorRole.Text: style.INK,
        QPalette.ColorRole.Button: style.PANEL,
        QPalette.ColorRole.ButtonText: style.INK,
        QPalette.ColorRole.ToolTipBase: style.PANEL,
        QPalette.ColorRole.ToolTipText: style.INK,
        QPalette.ColorRole.Highlight: style.WANTED,
        QPalette.ColorRole.HighlightedText: "#ffffff",
        QPalette.ColorRole.PlaceholderText: style.INK_SOFT,
    }
    for role, colour in roles.items():
        palette.setColor(role, QColor(colour))
    return palette


def application() -> QApplication:
    """The QApplication (made if there is none), in our light style."""
    select_backend()
    app = QApplication.instance()
    if app is None:
        app = QApplication([sys.argv[0] if sys.argv else "rtanalyzer"])
        app.setApplicationName("rtanalyzer")
    app.setStyle("Fusion")
    app.setPalette(_light_palette())
    return app


def prepare_session(config, notice: str | None, explicit: frozenset[str], settings):
    """The config to start with: saved choices restored under the command line's, source checked.

    Returns
    -------
    (SessionConfig, GeneratorChoice, banner text or None)
    """
    from rtanalyzer.gui.choices import GeneratorChoice
    from rtanalyzer.live.session import device_present

    generator = GeneratorChoice.from_signal(config.signal) if config.signal is not None else GeneratorChoice()
    if "measurement" not in explicit:
        config = config.with_changes(measurement=None)  # the window's "as the signal suggests"
    restored, generator = settings.restore_session(config, generator, explicit)
    banner = None
    if notice:
        why = notice.removesuffix(": using the simulated bench")
        banner = (f"Simulated bench — {why}. The figures come from a model of a phasing exciter: turn its "
                  "knobs on the right, or choose a sound card under Source once one is connected.")
    if restored.source != config.source:
        if restored.source == "device":
            present, why = device_present()
            if not present:
                restored = restored.with_changes(source="sim")
                banner = (f"Simulated bench — {why} (last time: the sound card). Choose it again under Source "
                          "once it is connected.")
            else:
                banner = None
        elif restored.source == "file" and not (restored.file and Path(restored.file).is_file()):
            restored = restored.with_changes(source="sim")
            banner = (f"Simulated bench — last time's recording {restored.file or ''} is not there any more; "
                      "choose it again under Source.")
        else:
            banner = None
    return restored, generator, banner


def run_window(config, notice: str | None = None, explicit: frozenset[str] = frozenset(),
               screenshot: str | os.PathLike | None = None, after: float = 2.0,
               seconds: float | None = None) -> int:
    """Open the live window for ``config`` (a resolved SessionConfig) and run until it is closed.

    Parameters
    ----------
    config : rtanalyzer.live.session.SessionConfig
    notice : str, optional
        Why the source was chosen (e.g. no sound device: the simulated bench); shown as a banner.
    explicit : frozenset of str
        What the command line set; the rest comes from the saved settings (see
        :meth:`rtanalyzer.gui.settings.WindowSettings.restore_session`).
    screenshot : path, optional
        Save a picture of the whole window ``after`` seconds after it opens, then close it.
    seconds : float, optional
        Close the window after this long.

    Returns
    -------
    int
        0, or 2 when the screenshot could not be written.
    """
    from rtanalyzer.cli.cautions import show_first_run_notice
    from rtanalyzer.gui.settings import WindowSettings
    from rtanalyzer.gui.window import MainWindow

    app = application()  # keep the reference: PyQt destroys an application nobody holds
    settings = WindowSettings()
    first_run = show_first_run_notice(io.StringIO())  # marks the cautions as shown; the window shows them
    config, generator, banner = prepare_session(config, notice, explicit, settings)
    window = MainWindow(config, generator, settings, banner)
    window.show()
    if first_run:
        QTimer.singleShot(400, lambda: window.show_cautions(first_time=True))
    outcome = {"status": 0, "error": None}
    if screenshot is not None:
        target = Path(screenshot)

        def shoot() -> None:
            try:
                window.export_png(target)
            except (OSError, RtaError) as exc:
                outcome["status"], outcome["error"] = 2, f"could not save the screenshot {target}: {exc}"
            window.close()

        QTimer.singleShot(int(max(after, 0.0) * 1000), shoot)
    if seconds is not None:
        QTimer.singleShot(int(max(seconds, 0.0) * 1000), window.close)
    loop = QEventLoop()
    window.closed.connect(loop.quit)
    restore = _close_on_interrupt(window)
    try:
        if window.isVisible():
            loop.exec()
    finally:
        restore()
        window.deleteLater()
        app.sendPostedEvents()
    if outcome["error"]:
        raise RtaError(outcome["error"])
    return outcome["status"]


def _close_on_interrupt(window):
    """Ctrl-C in the terminal closes the window (Python handles signals only between Qt events)."""
    if threading.current_thread() is not threading.main_thread():
        return lambda: None
    previous = signal.getsignal(signal.SIGINT)
    signal.signal(signal.SIGINT, lambda *_: window.close())
    ticker = QTimer(window)
    ticker.timeout.connect(lambda: None)
    ticker.start(250)

    def restore() -> None:
        ticker.stop()
        signal.signal(signal.SIGINT, previous)

    return restore
