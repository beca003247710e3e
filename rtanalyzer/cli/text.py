"""Short tables a person reads at a glance, made from a measurement's JSON form."""

from __future__ import annotations

import math
from typing import Any, Callable


def _db(value: float | None, unit: str = "dB") -> str:
    return "—" if value is None else f"{value:.1f} {unit}"


def _hz(value: float | None) -> str:
    return "—" if value is None else f"{value:.1f} Hz"


def _suppression(value: float | None, detected: bool) -> str:
    if value is None:
        return "—"
    return f"{value:.1f} dB" if detected else f"not detected, at least {value:.1f} dB down"


def _footer(r: dict[str, Any]) -> list[str]:
    lines = [
        f"noise floor {r['noise_floor_dbfs']:.1f} dBFS in {r['analysis_bandwidth_hz']:.2f} Hz "
        "(analysis bandwidth)"
    ]
    if r.get("calibration"):
        volts = any(k.endswith("_dbv") for k in r) or any(
            isinstance(p, dict) and any(k.endswith("_dbv") for k in p) for p in r.get("points") or [])
        lines.append("calibration applied: " + ", ".join(r["calibration"])
                     + (" (levels in dBV re 1 V RMS: the _dbv keys of --json)" if volts else ""))
    if r.get("clipped"):
        lines.append("CLIPPED: reduce the input level; these figures are not valid")
    lines += [f"warning: {w}" for w in r.get("warnings", [])]
    return lines


def sideband(r: dict[str, Any]) -> list[str]:
    lines = []
    if r["carrier_detected"]:
        lines.append(
            f"carrier  {_hz(r['carrier_hz'])}  {r['carrier_dbfs']:.1f} dBFS  "
            f"suppression {r['carrier_suppression_db']:.1f} dBc"
        )
    else:
        lines.append(
            f"carrier  {_hz(r['carrier_hz'])}  not detected, at least "
            f"{_db(r['carrier_suppression_db'])} below the wanted tone"
        )
    lines.append(f"{'tone':>9}  {'wanted':>22}  {'unwanted':>22}  opposite-sideband suppression")
    for p in r["points"]:
        wanted = f"{_hz(p['wanted_hz'])} {_db(p['wanted_dbfs'], 'dBFS')}"
        unwanted = f"{_hz(p['unwanted_hz'])} " + (_db(p["unwanted_dbfs"], "dBFS") if p["unwanted_detected"] else "(noise)")
        lines.append(
            f"{p['tone_hz']:>6g} Hz  {wanted:>22}  {unwanted:>22}  "
            f"{_suppression(p['sideband_suppression_db'], p['unwanted_detected'])}"
        )
    worst = r["worst_sideband_suppression_db"]
    if worst is not None and len(r["points"]) > 1:
        prefix = "at least " if r["worst_is_lower_bound"] else ""
        lines.append(f"worst opposite-sideband suppression: {prefix}{worst:.1f} dB")
    in_band = r.get("worst_in_band")  # absent from results saved before the band existed
    if in_band is not None:
        lo, hi = r["band_hz"]
        figure = in_band["sideband_suppression_db"]
        figure_text = (f"at least {figure:.1f} dB at {in_band['tone_hz']:g} Hz (unwanted not detected)"
                       if in_band["is_lower_bound"] else f"{figure:.1f} dB at {in_band['tone_hz']:g} Hz")
        lines.append(f"worst in {lo:g}–{hi:g} Hz: {figure_text}")
    if r.get("sweep_steps"):
        lines.append(f"stepped sweep: {r['sweep_steps']} steps, each measured over its own settled part "
                     "(carrier from the loudest step)")
    lines.append(f"wanted sideband {r['wanted_side']} the carrier" + (
        f"; receiver tuned {r['tuning_offset_hz']:+.1f} Hz off" if r.get("tuning_offset_hz") is not None else ""
    ))
    return lines + _footer(r)


def twotone(r: dict[str, Any]) -> list[str]:
    (fl, fh), (ll, lh) = r["tone_hz"], r["tone_dbfs"]
    lines = [
        f"tones  {fl:.1f} Hz {ll:.1f} dBFS  ·  {fh:.1f} Hz {lh:.1f} dBFS  ·  PEP {r['pep_dbfs']:.1f} dBFS",
        f"{'order':>5}  {'lower':>30}  {'upper':>30}  worst",
    ]
    for o in r["imd"]:
        cells = []
        for side in ("lower", "upper"):
            if o[f"{side}_hz"] is None:
                cells.append("out of range")
            elif o[f"{side}_detected"]:
                cells.append(f"{o[side + '_hz']:.1f} Hz {o[side + '_dbc']:.1f} dBc {o[side + '_db_pep']:.1f} dB PEP")
            else:
                cells.append(f"{o[side + '_hz']:.1f} Hz below {o[side + '_dbc']:.1f} dBc")
        worst = o["worst_db_pep"]
        worst_text = "—" if worst is None else (f"below {worst:.1f}" if o["worst_is_bound"] else f"{worst:.1f}") + " dB PEP"
        lines.append(f"IMD{o['order']:<2}  {cells[0]:>30}  {cells[1]:>30}  {worst_text}")
    if r.get("carrier_suppression_db") is not None:  # known with --carrier
        bound = "" if r["carrier_detected"] else "not detected, at least "
        lines.append(f"carrier  {_hz(r['carrier_hz'])}  {bound}{r['carrier_suppression_db']:.1f} dBc")
    for u in r.get("unwanted") or []:
        bound = "" if u["unwanted_detected"] else "not detected, at least "
        lines.append(f"unwanted sideband of the {u['tone_hz']:g} Hz tone at {_hz(u['unwanted_hz'])}: "
                     f"{bound}{u['sideband_suppression_db']:.1f} dB down")
    return lines + _footer(r)


def _predicted(value: float, bound: bool | None) -> str:
    """A predicted suppression; a bound (errors within their noise) is written as one, rounded down."""
    return f"\u2265 {math.floor(value * 10.0) / 10.0:.1f} dB (limited by noise)" if bound else f"{value:.1f} dB"


def quadrature(r: dict[str, Any]) -> list[str]:
    lines = [
        f"{'tone':>10}  {'I - Q phase':>11}  {'as time':>11}  {'error':>9}  {'Q / I':>9}  predicted suppression"
    ]
    for p in r["points"]:
        mark = "" if p["status"] == "quadrature" else f"  ({p['status'].upper()})"
        lines.append(
            f"{p['frequency_hz']:>7.1f} Hz  {p['phase_difference_deg']:>10.3f}°  {p['time_offset_us']:>8.2f} µs  "
            f"{p['phase_error_deg']:>+8.3f}°  {p['amplitude_ratio_db']:>+6.3f} dB  "
            f"{_predicted(p['predicted_suppression_db'], p.get('predicted_suppression_is_bound'))}{mark}"
        )
    if r["worst_predicted_suppression_db"] is not None and len(r["points"]) > 1:
        lines.append(f"worst predicted suppression "
                     f"{_predicted(r['worst_predicted_suppression_db'], r.get('worst_is_lower_bound'))} at "
                     f"{r['worst_frequency_hz']:.1f} Hz")
    band = r["band"]
    if band["worst_predicted_suppression_db"] is not None and band["points"] < len(r["points"]):
        lines.append(f"in the band {band['low_hz']:g}-{band['high_hz']:g} Hz: worst "
                     f"{_predicted(band['worst_predicted_suppression_db'], band.get('worst_is_lower_bound'))} at "
                     f"{band['worst_frequency_hz']:.1f} Hz")
    return lines + _footer(r)


def generic(r: dict[str, Any]) -> list[str]:
    return [f"{k}: {v}" for k, v in r.items() if k not in ("measurement",)]


RENDERERS: dict[str, Callable[[dict[str, Any]], list[str]]] = {
    "sideband": sideband,
    "twotone": twotone,
    "quadrature": quadrature,
}


def render(name: str, result: dict[str, Any], header: str) -> str:
    return "\n".join([header, *RENDERERS.get(name, generic)(result)])
