"""Sideband figures from a stepped-sweep capture: each step measured over its own settled span.

A whole-exciter sweep plays one modulating tone at a time, so a spectrum of the whole capture
holds every step's sidebands diluted by the others' time and smeared by the switching. Here the
capture is cut into its steps (``dsp.quadrature.sweep_steps``: where the strongest component —
the wanted sideband — holds still, its settling left out), and each step is measured alone as a
one-tone capture. The step's tone is its distance from the carrier, matched to the nearest
``--tone`` (within 2 % or 5 Hz once the receiver's common tuning offset, the median over the
steps, is taken out; so step frequencies may be given rounded).
"""

from __future__ import annotations

import dataclasses
from typing import Any, Callable, Mapping

import numpy as np

from rtanalyzer.dsp.quadrature import sweep_steps
from rtanalyzer.errors import MeasurementError, PlanError
from rtanalyzer.measurements.plan import SEARCH_HZ
from rtanalyzer.sources.capture import Signal

MATCH_FRACTION = 0.02
MATCH_MIN_HZ = 5.0
MIN_STEP_SAMPLES = 4096  # shorter settled spans cannot resolve the sidebands of a low tone


def measure_sweep(measure_one: Callable[[Signal, Mapping[str, Any]], Any], signal: Signal,
                  settings: Mapping[str, Any], progress=None):
    """Measure every step of a sweep; return one result holding a point per step's tone.

    Parameters
    ----------
    measure_one : callable
        ``measure_one(segment, settings)`` measures a steady one-tone capture (the plugin's own
        steady analysis) and returns a ``SidebandResult``.
    signal : Signal
    settings : mapping
        The plugin's settings with defaults; ``carrier`` is needed to tell each step's tone.
    progress : callable, optional
        ``progress(done, total)`` after each step.

    Raises
    ------
    PlanError
        Without ``carrier``, or when no step matches a requested tone.
    """
    carrier = settings.get("carrier")
    if carrier is None:
        raise PlanError(f"{signal.where} is a stepped sweep: give --carrier HZ so each step's tone can be told "
                        "from its distance to the carrier")
    x = signal.samples
    left, right = (x.real, x.imag) if signal.is_complex else (x, x)
    steps = [s for s in sweep_steps(left, right, signal.rate_hz) if s[1] - s[0] >= MIN_STEP_SAMPLES]
    requested = sorted(float(t) for t in settings["tone"])
    warnings: list[str] = []
    distances = [abs(abs(rough) - abs(carrier)) for _, _, rough in steps]
    # A receiver tuned a little off moves every step by the same few Hz: take that out first.
    offsets = [d - min(requested, key=lambda t: abs(t - d)) for d in distances]
    offset = float(np.median(offsets)) if offsets else 0.0
    if abs(offset) > SEARCH_HZ:
        offset = 0.0
    jobs = []
    for (start, stop, rough), distance in zip(steps, distances):
        tone = min(requested, key=lambda t: abs(t - (distance - offset)))
        if abs(tone - (distance - offset)) > max(MATCH_MIN_HZ, MATCH_FRACTION * distance):
            warnings.append(f"a step at {abs(rough):.1f} Hz ({distance:.0f} Hz from the carrier) matches no --tone: "
                            "not measured")
            continue
        jobs.append((tone, start, stop))
    if not jobs:
        raise PlanError(f"{signal.where}: no step of the sweep matches a --tone (steps found: {len(steps)}); "
                        "check --tone and --carrier")
    results = []
    for done, (tone, start, stop) in enumerate(jobs, 1):
        segment = dataclasses.replace(signal, samples=x[start:stop])
        try:
            results.append(measure_one(segment, {**settings, "tone": [tone]}))
        except MeasurementError as exc:  # one unreadable step does not sink the others
            warnings.append(f"the step of the {tone:g} Hz tone could not be measured: {exc}")
        if progress is not None:
            progress(done, len(jobs))
    if not results:
        raise PlanError(f"{signal.where}: no step of the sweep could be measured ({warnings[-1]})")
    played = {r.points[0].tone_hz for r in results}
    warnings += [f"no step of the sweep played the {t:g} Hz tone" for t in requested if t not in played]
    for r in results:
        tone = r.points[0].tone_hz
        warnings += [f"step {tone:g} Hz: {w}" for w in r.warnings if "inside the band" not in w]
    loudest = max(results, key=lambda r: r.strongest_wanted_dbfs if r.strongest_wanted_dbfs is not None else -999.0)
    points = tuple(sorted((r.points[0] for r in results), key=lambda p: p.tone_hz))
    return dataclasses.replace(
        loudest,
        points=points,
        noise_floor_dbfs=float(np.median([r.noise_floor_dbfs for r in results])),
        analysis_bandwidth_hz=float(np.median([r.analysis_bandwidth_hz for r in results])),
        clipped=signal.clipped,
        warnings=tuple(dict.fromkeys(warnings)),
        sweep_steps=len(results),
    )
