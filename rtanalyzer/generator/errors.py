"""Errors of the test-signal generator: one line naming the parameter, the bad value and the allowed range."""

from __future__ import annotations

from rtanalyzer.errors import RtaError


class GeneratorError(RtaError):
    """A test signal or generator setting that cannot be played as asked."""


class OutputDeviceError(GeneratorError):
    """A sound card that cannot play the signal: PortAudio missing, unknown device, device fault."""
