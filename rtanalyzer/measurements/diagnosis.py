"""What limits the suppression, and which way to turn: an error model fitted to measured points.

Model of a phasing exciter's audio side, per audio frequency f:

- a constant amplitude imbalance a (dB, Q over I) — what the amplitude trimmer moves;
- a constant phase offset ε0 (degrees) — what the phase trimmer moves;
- the network's frequency-dependent ripple r(f) — fixed by its parts, no trimmer moves it.
  With the network's component values known and the measured phase following them, r(f) is the
  design's own departure from 90° (``network_design``); otherwise it is whatever the constant
  terms leave. The measured ripple and the design's are reported apart.

Errors within their noise (``dsp.quadrature.noise_limited_suppression``) are never named as
the limit: the figures they leave are lower bounds ("at least").

From quadrature points (phase difference and amplitude ratio, with sign) all three are fitted by
least squares and the advice has a direction. Sideband suppression alone gives only the size of
the combined error: read back through the exact image-rejection relation it is an amplitude
ratio of 20·log10((r + 1)/(r - 1)) dB if it is all amplitude, or a phase error of 2·atan(1/r) if
it is all phase (r = 10^(S/20)); for small errors 4·10^(-S/10) ≈ δ² + ε² (δ = g - 1, ε in
radians), which the probe's parabola uses. It cannot tell amplitude from phase, nor the sign of
either, so the advice is a guided probe — nudge one trimmer, measure again, and :func:`probe` compares the
readings.

References
----------
Image-rejection relation of quadrature modulators (B. Razavi, *RF Microelectronics*, chapter on
image-reject architectures); first-order all-pass phase -2·atan(ωRC) (textbook circuit theory).
Least-squares fitting of a constant and the minimax (Chebyshev) constant: standard results.
"""

from __future__ import annotations

from typing import Any, Sequence

import numpy as np

from rtanalyzer.dsp.quadrature import (
    MAX_SUPPRESSION_DB,
    NOISE_SIGMAS,
    amplitude_only_error_db,
    image_rejection_db,
    noise_limited_suppression,
    phase_only_error_deg,
)
from rtanalyzer.errors import MeasurementError
from rtanalyzer.measurements.network_design import Network, best_trim_deg

#: Imbalances smaller than these need no trim (the suppression they cost is below 0.1 dB at 60 dB).
AMPLITUDE_OK_DB = 0.005
PHASE_OK_DEG = 0.01
#: A suppression change smaller than this between two readings is not a clear change.
PROBE_CLEAR_DB = 0.2
#: Saved quadrature results give phase and amplitude figures to this step (6 decimals; 4 before
#: they carried ``predicted_suppression_is_bound``).
SAVED_STEP = 1e-6
OLD_SAVED_STEP = 1e-4


def _db(x: float) -> float:
    return round(float(x), 2)


def _us(phase_deg: float, frequency_hz: float) -> float:
    return phase_deg / (360.0 * frequency_hz) * 1e6


def _worst(values: np.ndarray, bounds: np.ndarray) -> int:
    """Index of the lowest figure, a measured one before a bound of the same value."""
    return min(range(len(values)), key=lambda i: (float(values[i]), bool(bounds[i])))


def _figure(value: float, bound: bool) -> str:
    """A suppression in words: a lower bound says so and is rounded down."""
    return f"at least {np.floor(value * 10.0) / 10.0:.1f} dB" if bound else f"{value:.1f} dB"


def _bound_db(value: float, bound: bool) -> float:
    return float(np.floor(value * 100.0) / 100.0) if bound else _db(value)


def _small(x: float) -> str:
    """A small positive figure with two significant digits and no exponent (0.00012, 0.35)."""
    return np.format_float_positional(float(x), precision=2, unique=False, fractional=False, trim="-")


def _angle(x: float) -> str:
    """An angle in degrees: two decimals, or two significant digits when smaller than 0.01."""
    return f"{x:.2f}" if x >= 0.01 else _small(x)


def _rms(x: np.ndarray) -> float:
    return float(np.sqrt(np.mean(np.square(x))))


def diagnose_quadrature(points: Sequence[dict[str, Any]], network: Network | None = None,
                        band_hz=(300.0, 3000.0)) -> dict[str, Any]:
    """Fit the error model to quadrature points and say what limits the result and which way to turn.

    Parameters
    ----------
    points : sequence of dict
        ``points`` of an ``analyze quadrature`` result (frequency_hz, phase_difference_deg,
        amplitude_ratio_db, and, when saved by this version, phase_uncertainty_deg,
        amplitude_uncertainty_db, predicted_suppression_db, predicted_suppression_is_bound).
    network : Network, optional
        The network's component values. Its computed ripple becomes the frequency-dependent term
        when the measured points follow it; either way the measured and the design's ripple are
        both reported.
    band_hz : (float, float)
        Only points inside the band are fitted and judged.

    Returns
    -------
    dict
        ``amplitude_offset_db``, ``phase_offset_deg``, ``ripple_deg``, the limits (each with an
        ``..._is_lower_bound`` flag: true when the errors behind it are within their noise),
        ``limited_now_by`` (``"amplitude"``, ``"phase"`` or None when no measured error limits),
        ``summary`` and ``advice``: lines such as ``"amplitude: raise Q by 0.15 dB"``.

    Raises
    ------
    MeasurementError
        When no point lies inside the band.

    Notes
    -----
    An error is judged against its noise as :func:`rtanalyzer.dsp.quadrature.noise_limited_suppression`
    does (:data:`~rtanalyzer.dsp.quadrature.NOISE_SIGMAS` standard deviations): the mean amplitude
    ratio against the noise of a mean, each point's phase error against its own, and the ripple
    (half the spread of the phase error) against the largest point's. A point without
    uncertainties (saved by an older version) counts the 4-decimal rounding of its figures as
    its noise. Nothing below the noise is named as a limit: the figure is then "at least".

    Examples
    --------
    Q 0.15 dB low and 0.5 degrees too far behind I, at four tones:

    >>> pts = [{"frequency_hz": f, "phase_difference_deg": 90.5, "amplitude_ratio_db": -0.15}
    ...        for f in (400.0, 800.0, 1600.0, 2400.0)]
    >>> d = diagnose_quadrature(pts)
    >>> d["advice"][0]
    'amplitude: raise Q by 0.15 dB (or lower I by as much)'
    """
    lo, hi = (float(b) for b in band_hz)
    inside = [p for p in points if lo <= p["frequency_hz"] <= hi and abs(abs(p["phase_difference_deg"]) - 90) < 45]
    if not inside:
        raise MeasurementError(f"no quadrature point lies inside the band {lo:g}-{hi:g} Hz; widen --band")
    k_sig = NOISE_SIGMAS
    f = np.array([p["frequency_hz"] for p in inside])
    diff = np.array([p["phase_difference_deg"] for p in inside])
    ratio = np.array([p["amplitude_ratio_db"] for p in inside])
    # Nothing finer than half the step the saved figures are rounded to is known from them.
    step = np.array([SAVED_STEP if "predicted_suppression_is_bound" in p else OLD_SAVED_STEP for p in inside])
    sig_p = np.maximum([float(p.get("phase_uncertainty_deg") or 0.0) for p in inside], step / 2)
    sig_a = np.maximum([float(p.get("amplitude_uncertainty_db") or 0.0) for p in inside], step / 2)
    sign = 1.0 if np.median(diff) >= 0 else -1.0
    error = np.abs(diff) - 90.0  # positive: I and Q further apart than 90 degrees
    n = len(inside)

    # Now: each point's own figure (a bound where its errors are within their noise).
    now, now_bound = noise_limited_suppression(ratio, error, sig_a, sig_p)
    for i, p in enumerate(inside):
        if p.get("predicted_suppression_db") is not None and "predicted_suppression_is_bound" in p:
            now[i], now_bound[i] = p["predicted_suppression_db"], bool(p["predicted_suppression_is_bound"])
    k_now = _worst(now, now_bound)

    # Each error alone: the mean amplitude ratio (noise of a mean), the phase error point by point.
    a0 = float(np.mean(ratio))
    noise_a0 = k_sig * float(np.sqrt(np.sum(sig_a**2))) / n
    amp_resolved = abs(a0) > noise_a0
    amp_only, amp_bound = (float(x) for x in noise_limited_suppression(a0, 0.0, noise_a0 / k_sig, 0.0))
    amp_bound = bool(amp_bound)
    phase_each, phase_each_bound = noise_limited_suppression(0.0, error, 0.0, sig_p)
    k_phase = _worst(phase_each, phase_each_bound)
    phase_only, phase_bound = float(phase_each[k_phase]), bool(phase_each_bound[k_phase])
    if not amp_bound and (amp_only < phase_only or (amp_only == phase_only and phase_bound)):
        limiter = "amplitude"
    elif not phase_bound and phase_only < amp_only:
        limiter = "phase"
    else:
        limiter = None  # the smaller of the two is only a bound: no measured error limits

    # The part of the phase error that changes with frequency: measured, and the design's.
    noise_p = k_sig * float(sig_p.max())  # a spread of the phase error within this may be noise
    measured_half = float(0.5 * (error.max() - error.min()))
    design_half = None
    follows = None  # do the measured points follow the design's ripple? None: cannot tell
    if network is not None:
        design = np.abs(network.difference_deg(f)) - 90.0
        design_half = float(0.5 * (design.max() - design.min()))
        if n >= 2 and design_half > noise_p:
            flat = _rms(error - np.mean(error))
            along = _rms((error - design) - np.mean(error - design))
            follows = along < flat
    if follows:
        eps0 = float(np.mean(error - design))
        model = eps0 + design
        source = "network"
    else:
        eps0 = float(np.mean(error))
        model = error
        source = "residual"
    trim = float(best_trim_deg(model))  # add to the phase error: minimax over the band
    half_ripple = float(0.5 * (model.max() - model.min()))
    ripple_resolved = half_ripple > noise_p
    trim_resolved = abs(trim) > noise_p
    if ripple_resolved:
        after = image_rejection_db(1.0, np.radians(model + trim))
        after_bound = after >= MAX_SUPPRESSION_DB
    elif not (amp_resolved or trim_resolved):
        after, after_bound = now, now_bound  # no trim to make: as now
    else:
        # Nothing the points resolve changes with frequency: after both trims what is left of
        # either error is within its noise; the largest errors that allows give the bound.
        after = image_rejection_db(10.0 ** ((np.abs(ratio - a0) + k_sig * sig_a) / 20.0),
                                   np.radians(np.abs(model + trim) + k_sig * sig_p))
        after_bound = np.ones(n, dtype=bool)
    k_after = _worst(after, after_bound)

    advice = []
    if not amp_resolved:
        advice.append(f"amplitude: balanced within the noise (±{_small(noise_a0)} dB); leave the amplitude trim"
                      if noise_a0 < AMPLITUDE_OK_DB else
                      f"amplitude: no imbalance above the noise (±{_small(noise_a0)} dB); a louder or longer capture "
                      "would tell")
    elif abs(a0) >= AMPLITUDE_OK_DB:
        verb, other = ("raise", "lower") if a0 < 0 else ("lower", "raise")
        advice.append(f"amplitude: {verb} Q by {abs(a0):.2f} dB (or {other} I by as much)")
    else:
        advice.append(f"amplitude: balanced within {AMPLITUDE_OK_DB} dB; leave the amplitude trim")
    f_ref = float(f[k_now])
    if not trim_resolved:
        advice.append(f"phase: centred within the noise (±{_small(noise_p)}°); leave the phase trim"
                      if noise_p < PHASE_OK_DEG else
                      f"phase: no offset above the noise (±{_small(noise_p)}°); a louder or longer capture would tell")
    elif abs(trim) >= PHASE_OK_DEG:
        lead = "I leads Q" if sign > 0 else "Q leads I"
        closer = "closer together" if trim < 0 else "further apart"
        advice.append(
            f"phase: bring I and Q {abs(trim):.2f}° {closer} ({lead}; that is "
            f"{abs(_us(trim, f_ref)):.2f} µs at {f_ref:.0f} Hz)"
        )
    else:
        advice.append("phase: centred; leave the phase trim")
    if ripple_resolved:
        if source == "network":
            what = "the network's ripple"
            detail = f"design ±{_angle(design_half)}°, measured ±{_angle(measured_half)}°: the points follow the design"
        else:
            what = "the part of the phase error that changes with frequency"
            detail = f"measured ±{_angle(measured_half)}°"
        advice.append(f"phase: {what} limits you to {_figure(after[k_after], after_bound[k_after])} at "
                      f"{f[k_after]:.0f} Hz ({detail}); no trim fixes that")
    else:
        advice.append(f"phase: no ripple above the noise (measured ±{_angle(measured_half)}°, noise ±{_angle(noise_p)}°): "
                      f"after both trims {_figure(after[k_after], True)} across the band")
    if network is not None and source != "network":
        design_limit = float(image_rejection_db(1.0, np.radians(design_half)))
        if follows is None:
            advice.append(f"the design's own ripple (±{_small(design_half)}°, {_figure(design_limit, False)}) is below "
                          "what these points resolve")
        else:
            advice.append(f"the measured points do not follow the design's ripple (design ±{_angle(design_half)}°, which "
                          f"alone would limit you to {design_limit:.1f} dB; measured ±{_angle(measured_half)}°): check "
                          "that the network file describes the network measured")
    if source == "network":
        unexplained = _rms(error - model)
        if unexplained > max(0.1, noise_p):
            advice.append(
                f"the measured phase departs from the design by {unexplained:.2f}° rms beyond "
                "a constant: parts differ from the list (tolerance, a wrong value, stray capacitance)"
            )
    spread = float(ratio.max() - ratio.min())
    if spread > max(0.05, 2.0 * k_sig * float(sig_a.max())):
        advice.append(f"amplitude: the ratio changes by {spread:.2f} dB across the band; an all-pass network keeps "
                      "it flat, so look for loading or a coupling capacitor")
    if limiter is not None:
        summary = f"{limiter} limits now: worst {_figure(now[k_now], now_bound[k_now])} at {f[k_now]:.0f} Hz"
    elif bool(np.all(now_bound)):
        summary = f"no error above the noise: {_figure(now[k_now], True)} across the band"
    else:
        summary = (f"no measured error clearly limits: worst {_figure(now[k_now], now_bound[k_now])} at "
                   f"{f[k_now]:.0f} Hz")
    return {
        "measurement": "diagnosis",
        "data": "quadrature",
        "band_hz": [lo, hi],
        "points": n,
        "ripple_source": source,
        "amplitude_offset_db": round(a0, 4),
        "phase_offset_deg": round(eps0, 4),
        "phase_trim_deg": round(trim, 4),
        "ripple_deg": round(half_ripple, 4),
        "ripple_measured_deg": round(measured_half, 4),
        "ripple_design_deg": None if design_half is None else round(design_half, 4),
        "ripple_above_noise": bool(ripple_resolved),
        "points_follow_design": follows,
        "amplitude_noise_db": round(noise_a0, 6),
        "phase_noise_deg": round(noise_p, 6),
        "now_worst_predicted_suppression_db": _bound_db(now[k_now], now_bound[k_now]),
        "now_worst_frequency_hz": round(float(f[k_now]), 2),
        "now_worst_is_lower_bound": bool(now_bound[k_now]),
        "amplitude_alone_limit_db": _bound_db(amp_only, amp_bound),
        "amplitude_alone_is_lower_bound": amp_bound,
        "phase_alone_limit_db": _bound_db(phase_only, phase_bound),
        "phase_alone_is_lower_bound": phase_bound,
        "limited_now_by": limiter,
        "after_trims_worst_predicted_suppression_db": _bound_db(after[k_after], after_bound[k_after]),
        "after_trims_worst_frequency_hz": round(float(f[k_after]), 2),
        "after_trims_worst_is_lower_bound": bool(after_bound[k_after]),
        "sign_known": True,
        "summary": summary,
        "advice": advice,
    }


def _error_power(suppression_db) -> np.ndarray:
    """δ² + ε² (radians²) that a suppression implies, from the image-rejection relation for small errors."""
    return 4.0 * 10.0 ** (-np.asarray(suppression_db, dtype=np.float64) / 10.0)


def diagnose_sideband(points: Sequence[dict[str, Any]], network: Network | None = None,
                      band_hz=(300.0, 3000.0)) -> dict[str, Any]:
    """What magnitude-only suppression figures can say, and the probe that tells the rest.

    Parameters
    ----------
    points : sequence of dict
        ``points`` of an ``analyze sideband`` result (tone_hz, sideband_suppression_db,
        unwanted_detected).
    network : Network, optional
        With the network's ripple known, a phase offset's sign can show in how the suppression
        varies with frequency; it is fitted when the data allow.
    band_hz : (float, float)

    Returns
    -------
    dict
        The combined error (as phase alone, as amplitude alone), whether it varies with
        frequency, and ``advice`` including the probe.
    """
    lo, hi = (float(b) for b in band_hz)
    inside = [p for p in points if lo <= p["tone_hz"] <= hi and p.get("sideband_suppression_db") is not None]
    if not inside:
        raise MeasurementError(f"no sideband point with a figure lies inside the band {lo:g}-{hi:g} Hz; widen --band")
    f = np.array([p["tone_hz"] for p in inside])
    s = np.array([p["sideband_suppression_db"] for p in inside])
    bound = [not p.get("unwanted_detected", True) for p in inside]
    power = _error_power(s)
    k = _worst(s, np.array(bound, dtype=bool))
    # The exact image-rejection relation read backwards (not its small-error form, which
    # understates the amplitude by 2 % at 33 dB and 7 % at 22 dB).
    as_phase = float(phase_only_error_deg(s[k]))
    as_amp = float(amplitude_only_error_db(s[k]))
    as_amp = None if not np.isfinite(as_amp) else as_amp
    # Variation only among measured points: a bound says how deep at least, not where it is.
    measured = s[~np.array(bound, dtype=bool)]
    varies = float(measured.max() - measured.min()) if measured.size >= 2 else 0.0
    at_most = "at most " if bound[k] else ""
    amp_words = (f"{at_most}{as_amp:.3f} dB if it is all amplitude" if as_amp is not None
                 else "no amplitude error alone gives a suppression of 0 dB or less")
    advice = [
        f"worst {_figure(s[k], bound[k])} at {f[k]:.0f} Hz: an error of {at_most}{as_phase:.2f}° if it is all "
        f"phase, or {amp_words}",
        "suppression figures alone cannot tell amplitude from phase, nor which way either is off",
    ]
    result: dict[str, Any] = {
        "measurement": "diagnosis",
        "data": "sideband",
        "band_hz": [lo, hi],
        "points": len(inside),
        "worst_suppression_db": _db(s[k]),
        "worst_frequency_hz": round(float(f[k]), 2),
        "worst_is_lower_bound": bound[k],
        "error_as_phase_deg": round(as_phase, 4),
        "error_as_amplitude_db": None if as_amp is None else round(as_amp, 4),
        "variation_db": round(varies, 2),
        "sign_known": False,
        "phase_offset_deg": None,
    }
    if network is not None and len(inside) >= 3:
        ripple = np.radians(np.abs(network.difference_deg(f)) - 90.0)
        grid = np.radians(np.linspace(-5.0, 5.0, 2001))
        costs = []
        for e0 in grid:
            rest = power - (e0 + ripple) ** 2
            d2 = max(0.0, float(np.mean(rest)))
            model = d2 + (e0 + ripple) ** 2
            costs.append(float(np.sum((10 * np.log10(model) - 10 * np.log10(power)) ** 2)))
        costs = np.array(costs)
        best = int(np.argmin(costs))
        mirror = int(np.argmin(np.abs(grid + grid[best])))
        distinct = costs[mirror] > 4.0 * costs[best] + 0.05 * len(inside)
        result["phase_offset_deg"] = round(float(np.degrees(grid[best])), 3)
        if distinct and abs(np.degrees(grid[best])) >= PHASE_OK_DEG:
            result["sign_known"] = True
            way = "closer together" if grid[best] > 0 else "further apart"
            advice.append(
                f"with the network's ripple known, the way the suppression changes across the band fits a phase "
                f"offset of {np.degrees(grid[best]):+.2f}°: bring I and Q {abs(np.degrees(grid[best])):.2f}° {way}; "
                "the amplitude's direction still needs the probe"
            )
    if varies > 6.0:
        advice.append(f"the measured suppression varies by {varies:.1f} dB across the band: part of the error "
                      "changes with frequency (the network's ripple), which no trim removes")
    advice.append(
        "probe: save this reading (analyze sideband ... --json > before.json), turn ONE trimmer a small step, "
        "save another (after.json), then run: rtanalyzer diagnose probe before.json after.json"
    )
    result["advice"] = advice
    return result


def _reading(figures: dict[str, Any]) -> dict[float, float]:
    """Error power per audio frequency from a saved result (sideband or quadrature)."""
    kind = figures.get("measurement")
    if kind == "sideband":
        return {float(p["tone_hz"]): float(_error_power(p["sideband_suppression_db"]))
                for p in figures.get("points", []) if p.get("sideband_suppression_db") is not None}
    if kind == "quadrature":
        return {float(p["frequency_hz"]): float(_error_power(p["predicted_suppression_db"]))
                for p in figures.get("points", []) if p.get("status", "quadrature") == "quadrature"}
    raise MeasurementError(f"a probe compares saved 'analyze sideband' or 'analyze quadrature' results; "
                           f"got measurement {kind!r}")


def _common(readings: list[dict[float, float]]) -> list[float]:
    base = sorted(readings[0])
    keep = []
    for f in base:
        if all(any(abs(f - g) <= max(1.0, 0.002 * f) for g in r) for r in readings[1:]):
            keep.append(f)
    return keep


def _at(reading: dict[float, float], f: float) -> float:
    g = min(reading, key=lambda x: abs(x - f))
    return reading[g]


def probe(readings: Sequence[dict[str, Any]]) -> dict[str, Any]:
    """Direction (and, from three readings, distance) to turn a trimmer, from equal nudges of it.

    Parameters
    ----------
    readings : sequence of dict
        Two or three saved results (``analyze sideband --json`` or ``analyze quadrature --json``)
        of the same tones: before the nudge, after one nudge and, optionally, after a second
        nudge of the same size in the same direction.

    Returns
    -------
    dict
        ``direction`` (``"keep"``, ``"reverse"`` or ``"unclear"``), the change in worst
        suppression, and ``advice``; with three readings also ``best_position_nudges``: where
        the error is least, counted in nudges from the first reading.

    Notes
    -----
    For small errors the unwanted power is proportional to δ² + ε² (image-rejection relation),
    and a trimmer moves one of them in proportion to its turn, so the error power is a parabola
    in the trimmer position: two readings give the slope's sign, three give the vertex. The
    error power is averaged over the tones common to the readings.

    Examples
    --------
    A phase error of 1.0° nudged to 0.8° then 0.6° (positions 0, 1, 2): best at 5 nudges.

    >>> from rtanalyzer.dsp.quadrature import image_rejection_db
    >>> r = [{"measurement": "sideband", "points": [{"tone_hz": 1000.0, "sideband_suppression_db":
    ...       float(image_rejection_db(1.0, np.radians(e)))}]} for e in (1.0, 0.8, 0.6)]
    >>> out = probe(r)
    >>> out["direction"], round(out["best_position_nudges"], 1)
    ('keep', 5.0)
    """
    if not 2 <= len(readings) <= 3:
        raise MeasurementError(f"a probe compares 2 or 3 readings; got {len(readings)}")
    kinds = {r.get("measurement") for r in readings}
    if len(kinds) != 1:
        raise MeasurementError(f"the readings mix measurements ({', '.join(sorted(map(str, kinds)))}); "
                               "compare like with like")
    parsed = [_reading(r) for r in readings]
    freqs = _common(parsed)
    if not freqs:
        raise MeasurementError("the readings share no tone; probe with the same test signal each time")
    power = np.array([np.mean([_at(r, f) for f in freqs]) for r in parsed])
    worst = [float(min(10 * np.log10(4.0 / _at(r, f)) for f in freqs)) for r in parsed]
    change = worst[1] - worst[0]
    out: dict[str, Any] = {
        "measurement": "probe",
        "tones_hz": freqs,
        "worst_suppression_db": [_db(w) for w in worst],
        "change_db": _db(change),
    }
    if abs(change) < PROBE_CLEAR_DB and abs(10 * np.log10(power[1] / power[0])) < PROBE_CLEAR_DB:
        out["direction"] = "unclear"
        advice = [f"no clear change ({change:+.2f} dB): the nudge was too small to see or this trimmer is not "
                  "what limits now; nudge it further, or probe the other trimmer"]
    elif power[1] < power[0]:
        out["direction"] = "keep"
        advice = [f"better by {10 * np.log10(power[0] / power[1]):.2f} dB: keep turning the same way"]
    else:
        out["direction"] = "reverse"
        advice = [f"worse by {10 * np.log10(power[1] / power[0]):.2f} dB: turn the other way, back past where you "
                  "started"]
    if len(power) == 3:
        # Parabola through (0, p0), (1, p1), (2, p2): vertex at x* = (3p0 - 4p1 + p2) / (2(p0 - 2p1 + p2)).
        curvature = power[0] - 2.0 * power[1] + power[2]
        if curvature > 0:
            x = float((3 * power[0] - 4 * power[1] + power[2]) / (2.0 * curvature))
            a = curvature / 2.0
            b = power[1] - power[0] - a
            floor = float(power[0] + b * x + a * x * x)
            out["best_position_nudges"] = x
            from_here = x - 2.0
            way = "on the same way" if from_here > 0 else "back the other way"
            advice.append(f"the error is least about {x:.1f} nudges from the first reading: turn about "
                          f"{abs(from_here):.1f} nudges {way} from where you are now")
            if floor > 0:
                advice.append(f"there this trimmer leaves about {10 * np.log10(4.0 / floor):.1f} dB (averaged over "
                              "the tones): the rest is the other trimmer or the network's ripple")
            out["direction"] = "keep" if x > 2.0 else "reverse"
        else:
            advice.append("the three readings do not bend as one trimmer's error should (unequal nudges, or noise): "
                          "repeat with equal, larger steps")
    out["advice"] = advice
    return out
