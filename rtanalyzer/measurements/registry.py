"""Measurement plugins found through the entry-point group ``rtanalyzer.measurements``.

Each entry point names a class (or a ready instance) that satisfies
``rtanalyzer.measurements.base.Measurement``; the built-ins are declared in this project's own
pyproject.toml, so a third-party plugin is found exactly as they are.
"""

from __future__ import annotations

import inspect
from importlib.metadata import entry_points

from rtanalyzer.errors import MeasurementError
from rtanalyzer.measurements.base import Measurement

GROUP = "rtanalyzer.measurements"


def available() -> dict[str, Measurement]:
    """Every plugin that loads, by name (a broken plugin is skipped, not fatal)."""
    found: dict[str, Measurement] = {}
    for ep in sorted(entry_points(group=GROUP), key=lambda e: e.name):
        try:
            obj = ep.load()
            plugin = obj() if inspect.isclass(obj) else obj
        except Exception:  # a third-party plugin must not take the instrument down
            continue
        if isinstance(plugin, Measurement):
            found.setdefault(ep.name, plugin)
    return found


def get(name: str) -> Measurement:
    """The plugin called ``name``; an unknown name lists the ones there are."""
    plugins = available()
    if name not in plugins:
        names = ", ".join(sorted(plugins)) or "none installed"
        raise MeasurementError(f"no measurement called '{name}'; available: {names}")
    return plugins[name]
