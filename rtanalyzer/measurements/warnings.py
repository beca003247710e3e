"""Warnings every plan-based measurement shares: clipping and a doubtful lock."""

from __future__ import annotations

from rtanalyzer.dsp.spectrum import Spectrum
from rtanalyzer.measurements.plan import SEARCH_HZ, Lock
from rtanalyzer.sources.capture import Signal


def capture_warnings(signal: Signal) -> list[str]:
    if signal.clipped:
        return [
            f"{signal.label} is clipped: suppression and IMD figures are meaningless until the "
            "input level is reduced"
        ]
    return []


def lock_warnings(lock: Lock, spectrum: Spectrum) -> list[str]:
    found = []
    if lock.tuning_offset_hz is not None and abs(lock.tuning_offset_hz) > 0.8 * SEARCH_HZ:
        found.append(
            f"locked {lock.tuning_offset_hz:+.1f} Hz from the given carrier, near the edge of the "
            f"+/-{SEARCH_HZ:g} Hz search: check --carrier"
        )
    return found


def resolution_warnings(spectrum: Spectrum) -> list[str]:
    """For a recorded capture: say when it was too short for fine bins."""
    if spectrum.bin_hz > 5.0:
        return [f"short capture: bins are {spectrum.bin_hz:.1f} Hz wide; record longer for finer figures"]
    return []
