"""The ``measurements`` command: list the measurement plugins that are installed."""

from __future__ import annotations

import sys

from rtanalyzer.errors import MeasurementError


def _run(args) -> int:
    from rtanalyzer.measurements.registry import GROUP, available

    plugins = available()
    if not plugins:
        raise MeasurementError(
            f"no measurement plugins found in entry-point group '{GROUP}'; "
            "is rtanalyzer installed (pip install -e .)?"
        )
    width = max(len(name) for name in plugins)
    for name in sorted(plugins):
        summary = " ".join(str(getattr(plugins[name], "summary", "")).split())
        sys.stdout.write(f"{name:<{width}}  {summary}\n".rstrip() + "\n")
    return 0


def add_parser(subparsers) -> None:
    """Register the ``measurements`` command."""
    parser = subparsers.add_parser(
        "measurements",
        help="list the installed measurement plugins",
        description="List the measurement plugins found in the 'rtanalyzer.measurements' entry-point group.",
    )
    parser.set_defaults(func=_run)
