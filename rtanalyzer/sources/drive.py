"""Which tones a generator signal puts into the exciter: what a frequency plan is built from."""

from __future__ import annotations

from rtanalyzer.generator.signals import Multitone, Quadrature, Sweep, Tone, TwoTone


def tones_of(signal) -> tuple[tuple[float, ...], tuple[float, ...]]:
    """(tones in Hz, their levels in dB relative to the first) for a steady signal.

    A sweep has no steady tones: ask its schedule for the step playing instead.
    """
    if isinstance(signal, (Tone, Quadrature)):
        return (signal.frequency_hz,), (0.0,)
    if isinstance(signal, TwoTone):
        return (signal.low_hz, signal.high_hz), (0.0, signal.ratio_db)
    if isinstance(signal, Multitone):
        return tuple(signal.frequencies_hz), (0.0,) * len(signal.frequencies_hz)
    if isinstance(signal, Sweep):
        return (signal.frequencies_hz[0],), (0.0,)
    raise TypeError(f"not a generator signal: {signal!r}")
