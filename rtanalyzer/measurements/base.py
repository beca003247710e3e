"""What a measurement plugin is: a name, its parameters, and measure(signal, settings) -> result.

Plugins are found through the entry-point group ``rtanalyzer.measurements`` (see
``registry``); the built-in ones are registered there the same way as anyone else's.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Mapping, Protocol, runtime_checkable

from rtanalyzer.sources.capture import Signal


@dataclass(frozen=True)
class Parameter:
    """One setting a measurement takes; front ends (CLI, GUI) build their inputs from these.

    ``nargs`` follows argparse: None for one value, an int for a fixed count, "+" for one or
    more (given as a repeatable option, e.g. ``--tone 700 --tone 1900``).
    """

    name: str
    kind: type = float
    help: str = ""
    default: Any = None
    required: bool = False
    nargs: int | str | None = None
    choices: tuple[Any, ...] | None = None
    unit: str = ""


@runtime_checkable
class Result(Protocol):
    """A measurement's figures: SI units inside, and a JSON form for the CLI and the store."""

    warnings: tuple[str, ...]

    def to_json(self) -> dict[str, Any]: ...


@runtime_checkable
class Measurement(Protocol):
    """A measurement plugin."""

    name: str
    summary: str
    parameters: tuple[Parameter, ...]

    def measure(self, signal: Signal, settings: Mapping[str, Any]) -> Result: ...


def settings_with_defaults(measurement: Measurement, settings: Mapping[str, Any]) -> dict[str, Any]:
    """Fill defaults and check required settings; a missing one is a one-line error."""
    from rtanalyzer.errors import MeasurementError

    filled = dict(settings)
    for p in measurement.parameters:
        if filled.get(p.name) is None:
            if p.required:
                raise MeasurementError(f"{measurement.name}: setting '{p.name}' is required ({p.help})")
            filled[p.name] = p.default
    return filled
