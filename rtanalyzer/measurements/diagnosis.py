"""What limits the suppression, and which way to turn: an error model fitted to measured points.

Model of a phasing exciter's audio side, per audio frequency f:

- a constant amplitude imbalance a (dB, Q over I) — what the amplitude trimmer moves;
- a constant phase offset ε0 (degrees) — what the phase trimmer moves;
- the network's frequency-dependent ripple r(f) — fixed by its parts, no trimmer moves it.
  With the network's component values known, r(f) is the design's own departure from 90°
  (``network_design``); otherwise it is whatever the constant terms leave.

From quadrature points (phase difference and amplitude ratio, with sign) all three are fitted by
least squares and the advice has a direction. Sideband suppression alone gives only the size of
the combined error, 4·10^(-S/10) ≈ δ² + ε² (δ = g - 1, ε in radians, from the image-rejection
relation for small errors): it cannot tell amplitude from phase, nor the sign of either, so the
advice is a guided probe — nudge one trimmer, measure again, and :func:`probe` compares the
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

from rtanalyzer.dsp.quadrature import image_rejection_db
from rtanalyzer.errors import MeasurementError
from rtanalyzer.measurements.network_design import Network, best_trim_deg

#: Imbalances smaller than these need no trim (the suppression they cost is below 0.1 dB at 60 dB).
AMPLITUDE_OK_DB = 0.005
PHASE_OK_DEG = 0.01
#: A suppression change smaller than this between two readings is not a clear change.
PROBE_CLEAR_DB = 0.2


def _db(x: float) -> float:
    return round(float(x), 2)


def _us(phase_deg: float, frequency_hz: float) -> float:
    return phase_deg / (360.0 * frequency_hz) * 1e6


def diagnose_quadrature(points: Sequence[dict[str, Any]], network: Network | None = None,
                        band_hz=(300.0, 3000.0)) -> dict[str, Any]:
    """Fit the error model to quadrature points and say what limits the result and which way to turn.

    Parameters
    ----------
    points : sequence of dict
        ``points`` of an ``analyze quadrature`` result (frequency_hz, phase_difference_deg,
        amplitude_ratio_db, ...).
    network : Network, optional
        The network's component values; its computed ripple is then the frequency-dependent term.
    band_hz : (float, float)
        Only points inside the band are fitted and judged.

    Returns
    -------
    dict
        ``amplitude_offset_db``, ``phase_offset_deg``, ``ripple_deg``, the limits, and ``advice``:
        lines such as ``"amplitude: raise Q by 0.15 dB"``.

    Raises
    ------
    MeasurementError
        When no point lies inside the band.

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
    f = np.array([p["frequency_hz"] for p in inside])
    diff = np.array([p["phase_difference_deg"] for p in inside])
    ratio = np.array([p["amplitude_ratio_db"] for p in inside])
    sign = 1.0 if np.median(diff) >= 0 else -1.0
    error = np.abs(diff) - 90.0  # positive: I and Q further apart than 90 degrees
    a0 = float(np.mean(ratio))
    g0 = 10.0 ** (a0 / 20.0)
    if network is not None:
        ripple = np.abs(network.difference_deg(f)) - 90.0
        eps0 = float(np.mean(error - ripple))
        model = eps0 + ripple
        unexplained = error - model
        source = "network"
    else:
        ripple = error - np.mean(error)
        eps0 = float(np.mean(error))
        model = error
        unexplained = np.zeros_like(error)
        source = "residual"
    now = image_rejection_db(10.0 ** (ratio / 20.0), np.radians(error))
    k_now = int(np.argmin(now))
    amp_only = float(image_rejection_db(g0, 0.0))
    phase_only = float(np.min(image_rejection_db(1.0, np.radians(error))))
    trim = float(best_trim_deg(model))  # add to the phase error: minimax over the band
    after = image_rejection_db(1.0, np.radians(model + trim))
    k_after = int(np.argmin(after))
    half_ripple = float(0.5 * (model.max() - model.min()))

    advice = []
    if abs(a0) >= AMPLITUDE_OK_DB:
        verb, other = ("raise", "lower") if a0 < 0 else ("lower", "raise")
        advice.append(f"amplitude: {verb} Q by {abs(a0):.2f} dB (or {other} I by as much)")
    else:
        advice.append(f"amplitude: balanced within {AMPLITUDE_OK_DB} dB; leave the amplitude trim")
    f_ref = float(f[k_now])
    if abs(trim) >= PHASE_OK_DEG:
        lead = "I leads Q" if sign > 0 else "Q leads I"
        closer = "closer together" if trim < 0 else "further apart"
        advice.append(
            f"phase: bring I and Q {abs(trim):.2f}° {closer} ({lead}; that is "
            f"{abs(_us(trim, f_ref)):.2f} µs at {f_ref:.0f} Hz)"
        )
    else:
        advice.append("phase: centred; leave the phase trim")
    what = "the network's ripple" if source == "network" else "the part of the phase error that changes with frequency"
    advice.append(
        f"phase: {what} limits you to {after[k_after]:.1f} dB at {f[k_after]:.0f} Hz (±{half_ripple:.2f}°); "
        "no trim fixes that"
    )
    if network is not None and unexplained.size and float(np.sqrt(np.mean(unexplained**2))) > 0.1:
        advice.append(
            f"the measured phase departs from the design by {float(np.sqrt(np.mean(unexplained**2))):.2f}° rms beyond "
            "a constant: parts differ from the list (tolerance, a wrong value, stray capacitance)"
        )
    spread = float(ratio.max() - ratio.min())
    if spread > 0.05:
        advice.append(f"amplitude: the ratio changes by {spread:.2f} dB across the band; an all-pass network keeps "
                      "it flat, so look for loading or a coupling capacitor")
    limiter = "phase" if phase_only < amp_only else "amplitude"
    return {
        "measurement": "diagnosis",
        "data": "quadrature",
        "band_hz": [lo, hi],
        "points": len(inside),
        "ripple_source": source,
        "amplitude_offset_db": round(a0, 4),
        "phase_offset_deg": round(eps0, 4),
        "phase_trim_deg": round(trim, 4),
        "ripple_deg": round(half_ripple, 4),
        "now_worst_predicted_suppression_db": _db(now[k_now]),
        "now_worst_frequency_hz": round(float(f[k_now]), 2),
        "amplitude_alone_limit_db": _db(amp_only),
        "phase_alone_limit_db": _db(phase_only),
        "limited_now_by": limiter,
        "after_trims_worst_predicted_suppression_db": _db(after[k_after]),
        "after_trims_worst_frequency_hz": round(float(f[k_after]), 2),
        "sign_known": True,
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
    k = int(np.argmin(s))
    as_phase = float(np.degrees(np.sqrt(power[k])))
    as_amp = float(20.0 * np.log10(1.0 + np.sqrt(power[k])))
    # Variation only among measured points: a bound says how deep at least, not where it is.
    measured = s[~np.array(bound, dtype=bool)]
    varies = float(measured.max() - measured.min()) if measured.size >= 2 else 0.0
    advice = [
        f"worst {s[k]:.1f} dB at {f[k]:.0f} Hz: an error of {as_phase:.2f}° if it is all phase, or "
        f"{as_amp:.3f} dB if it is all amplitude",
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
        "error_as_amplitude_db": round(as_amp, 4),
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
