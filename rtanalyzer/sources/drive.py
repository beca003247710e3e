"""Which tones a generator signal puts into the exciter: what a frequency plan is built from."""

from __future__ import annotations

from rtanalyzer.generator.signals import Multitone, Quadrature, Sweep, Tone, TwoTone
from rtanalyzer.generator.sweep import SweepPlan
from rtanalyzer.sources.live import Drive


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


def drive_at(plan: SweepPlan | None, steady_tones, frame: int, start_frame: int) -> Drive | None:
    """What a source rendering ``plan`` (or steady tones) from ``start_frame`` played at ``frame``.

    For a sweep: the step, its tone, whether it has settled, and the absolute frame from which
    this occurrence of the step is settled (an analysis window must start after it).
    """
    local = frame - start_frame
    if local < 0:
        return None
    if plan is None:
        return Drive(tuple(float(f) for f in steady_tones))
    step, freq, settled = plan.step_at(local)
    into_step = plan.dwell_frames - plan.frames_to_boundary(local)
    return Drive((freq,), settled, step, frame - into_step + plan.settle_frames)
