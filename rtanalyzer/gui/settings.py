"""The window's settings between runs: an INI file in the per-user configuration folder.

QSettings writes ``window.ini`` in :func:`rtanalyzer.cli.cautions.config_dir` (so
``RTANALYZER_CONFIG_DIR`` moves it, as the tests do). Values are stored as JSON text, so a
hand-edited or damaged file falls back to defaults key by key instead of failing.

What the command line names explicitly wins over what was saved; everything else is restored.
"""

from __future__ import annotations

import dataclasses
import json
from pathlib import Path
from typing import Any

from PyQt6.QtCore import QByteArray, QSettings

from rtanalyzer.cli.cautions import config_dir
from rtanalyzer.gui.choices import GeneratorChoice
from rtanalyzer.live.session import SOURCES, SessionConfig
from rtanalyzer.sources.bench.knobs import BenchKnobs

FILE_NAME = "window.ini"


def settings_path() -> Path:
    return config_dir() / FILE_NAME


class WindowSettings:
    """Read and write the saved choices (session, generator, bench knobs, view, window)."""

    def __init__(self, path: Path | None = None) -> None:
        self.path = Path(path) if path is not None else settings_path()
        self.q = QSettings(str(self.path), QSettings.Format.IniFormat)

    # -- raw values ----------------------------------------------------------------------------------

    def get(self, key: str, default: Any = None) -> Any:
        raw = self.q.value(key)
        if raw is None:
            return default
        try:
            return json.loads(str(raw))
        except (TypeError, ValueError):
            return default

    def put(self, key: str, value: Any) -> None:
        self.q.setValue(key, json.dumps(value))

    @property
    def has_session(self) -> bool:
        return self.q.contains("session/source")

    # -- the session ---------------------------------------------------------------------------------

    def save_session(self, config: SessionConfig, generator: GeneratorChoice) -> None:
        self.put("session/source", config.source)
        self.put("session/input_device", config.input_device)
        self.put("session/output_device", config.output_device)
        self.put("session/rate_hz", config.rate_hz)
        self.put("session/file", config.file)
        self.put("session/loop", config.loop)
        self.put("plan/carrier_hz", config.carrier_hz)
        self.put("plan/wanted", config.wanted)
        self.put("plan/iq", config.iq)
        self.put("plan/channel", config.channel)
        self.put("plan/tones_hz", list(config.tones_hz))
        self.put("measurement/kind", config.measurement)
        self.put("measurement/averages", config.averages)
        self.put("calibration/profiles", list(config.calibration))
        if config.band_hz is not None:
            self.put("band/range_hz", list(config.band_hz))
        self.put("generator/choice", generator.as_dict())
        self.put("bench/knobs", config.knobs.as_dict())

    def restore_session(self, config: SessionConfig, generator: GeneratorChoice,
                        explicit: frozenset[str] = frozenset()) -> tuple[SessionConfig, GeneratorChoice]:
        """``config`` and ``generator`` with the saved values put back, except those named in ``explicit``.

        ``explicit`` holds "source", "devices", "rate", "file", "signal", "plan.carrier",
        "plan.wanted", "plan.view", "plan.tones", "measurement", "averages", "calibration", "band" and
        "knobs.NAME". A saved calibration profile that no longer exists is left out.
        """
        if not self.has_session:
            return config, generator
        changes: dict[str, Any] = {}

        def take(group: str, field: str, key: str, check=lambda v: True) -> None:
            if group in explicit or not self.q.contains(key):
                return
            value = self.get(key)
            if check(value):
                changes[field] = value

        take("source", "source", "session/source", lambda v: v in SOURCES)
        take("devices", "input_device", "session/input_device", lambda v: v is None or isinstance(v, (str, int)))
        take("devices", "output_device", "session/output_device", lambda v: v is None or isinstance(v, (str, int)))
        take("rate", "rate_hz", "session/rate_hz", lambda v: isinstance(v, int) and 8000 <= v <= 192000)
        take("file", "file", "session/file", lambda v: v is None or isinstance(v, str))
        take("file", "loop", "session/loop", lambda v: isinstance(v, bool))
        take("plan.carrier", "carrier_hz", "plan/carrier_hz", lambda v: v is None or isinstance(v, (int, float)))
        take("plan.wanted", "wanted", "plan/wanted", lambda v: v in (None, "auto", "above", "below"))
        take("plan.view", "iq", "plan/iq", lambda v: isinstance(v, bool))
        take("plan.view", "channel", "plan/channel", lambda v: v is None or (isinstance(v, int) and 1 <= v <= 2))
        take("plan.tones", "tones_hz", "plan/tones_hz", lambda v: isinstance(v, list))
        take("measurement", "measurement", "measurement/kind", lambda v: v is None or v in measurement_names())
        take("averages", "averages", "measurement/averages", lambda v: isinstance(v, int) and 1 <= v <= 64)
        take("band", "band_hz", "band/range_hz",
             lambda v: isinstance(v, list) and len(v) == 2 and all(isinstance(b, (int, float)) for b in v)
             and 0 < v[0] < v[1])
        if "band_hz" in changes:
            changes["band_hz"] = tuple(float(b) for b in changes["band_hz"])
        take("calibration", "calibration", "calibration/profiles",
             lambda v: isinstance(v, list) and all(isinstance(n, str) for n in v))
        if "calibration" in changes:
            changes["calibration"] = tuple(n for n in changes["calibration"] if _profile_exists(n))
        if "tones_hz" in changes:
            changes["tones_hz"] = tuple(float(t) for t in changes["tones_hz"])
        saved_knobs = self.get("bench/knobs", {})
        if isinstance(saved_knobs, dict):
            knobs = config.knobs
            for name, value in saved_knobs.items():
                if f"knobs.{name}" in explicit or name == "iq":
                    continue
                try:
                    knobs = knobs.with_changes(**{name: value})
                except Exception:  # a bad or unknown saved knob keeps the current value
                    continue
            changes["knobs"] = knobs
        if "signal" not in explicit:
            saved = self.get("generator/choice")
            if isinstance(saved, dict):
                generator = GeneratorChoice.from_dict(saved)
        try:
            config = dataclasses.replace(config, **changes)
        except (TypeError, ValueError):
            pass
        return config, generator

    # -- view and window -----------------------------------------------------------------------------

    def save_view(self, log_frequency: bool, peak_hold: bool) -> None:
        self.put("view/log_frequency", log_frequency)
        self.put("view/peak_hold", peak_hold)

    def view(self) -> tuple[bool, bool]:
        log = self.get("view/log_frequency", False)
        hold = self.get("view/peak_hold", False)
        return bool(log) if isinstance(log, bool) else False, bool(hold) if isinstance(hold, bool) else False

    def save_window(self, geometry: QByteArray, state: QByteArray) -> None:
        self.q.setValue("window/geometry", geometry)
        self.q.setValue("window/state", state)

    def window(self) -> tuple[QByteArray | None, QByteArray | None]:
        geometry = self.q.value("window/geometry")
        state = self.q.value("window/state")
        return (geometry if isinstance(geometry, QByteArray) else None,
                state if isinstance(state, QByteArray) else None)

    def sync(self) -> None:
        self.q.sync()


def measurement_names() -> tuple[str, ...]:
    from rtanalyzer.measurements.registry import available

    return tuple(available())


def _profile_exists(name: str) -> bool:
    from rtanalyzer.errors import RtaError
    from rtanalyzer.measurements.calibration import find_profile

    try:
        find_profile(name)
    except RtaError:
        return False
    return True


def knobs_of(values: dict[str, float], base: BenchKnobs) -> BenchKnobs:
    """``base`` with the panel's knob values (validated by BenchKnobs)."""
    return base.with_changes(**values)
