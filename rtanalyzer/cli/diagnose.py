"""``rtanalyzer diagnose``: what limits the suppression and which way to turn.

- ``rtanalyzer diagnose FILE`` — FILE is a stereo phase-network capture (as for ``analyze
  quadrature``) or a saved ``analyze quadrature|sideband --json`` result;
- ``rtanalyzer diagnose probe BEFORE.json AFTER.json [AFTER2.json]`` — compare readings taken
  before and after nudging one trimmer (equal nudges).
"""

from __future__ import annotations

import argparse
import json
import math
from pathlib import Path

from rtanalyzer.cli.output import emit
from rtanalyzer.errors import MeasurementError, RtaError


def add_parser(subparsers) -> argparse.ArgumentParser:
    """Register ``diagnose`` on the ``rtanalyzer`` sub-command parser."""
    p = subparsers.add_parser(
        "diagnose",
        help="fit amplitude, phase and network ripple to measured points; say which way to turn",
        description="diagnose FILE: FILE is a stereo capture of the network's I (left) and Q (right) outputs, or a "
        "saved 'analyze quadrature|sideband --json' result. diagnose probe BEFORE.json AFTER.json [AFTER2.json]: "
        "compare readings taken before and after equal nudges of one trimmer.",
    )
    p.add_argument("items", nargs="+", metavar="FILE", help="a capture or saved result; or 'probe' and 2-3 saved results")
    p.add_argument("--network", metavar="NETFILE", help="network file of the audio network (its ripple is then known)")
    p.add_argument("--band", type=float, nargs=2, default=(300.0, 3000.0), metavar=("LO", "HI"),
                   help="audio band to judge, Hz (default 300 3000)")
    p.add_argument("--tone", type=float, nargs="+", action="extend", metavar="HZ",
                   help="capture: measure only these tones")
    p.add_argument("--calibration", action="extend", nargs="+", metavar="NAME", default=None,
                   help="capture: calibration profile(s) to apply")
    p.add_argument("--json", action="store_true", help="print exactly one JSON object")
    p.set_defaults(func=run)
    return p


def _load_json(path: str) -> dict:
    try:
        data = json.loads(Path(path).read_text(encoding="utf-8"))
    except OSError as exc:
        raise RtaError(f"{path}: cannot read ({exc.strerror or exc})") from None
    except (ValueError, UnicodeDecodeError):
        raise RtaError(f"{path}: not a JSON result; save one with 'rtanalyzer analyze ... --json > {path}'") from None
    if not isinstance(data, dict) or "measurement" not in data:
        raise RtaError(f"{path}: not an rtanalyzer result (no 'measurement' key)")
    return data


def run(args: argparse.Namespace) -> int:
    from rtanalyzer.measurements.diagnosis import diagnose_quadrature, diagnose_sideband, probe

    items = args.items
    if items[0] == "probe":
        if not 3 <= len(items) <= 4:
            raise RtaError("diagnose probe: give BEFORE.json AFTER.json, and optionally AFTER2.json (equal nudges)")
        out = probe([_load_json(p) for p in items[1:]])
    else:
        if len(items) != 1:
            raise RtaError(f"diagnose: give one capture or saved result (or 'probe' and 2-3 results); got {len(items)}")
        network = None
        if args.network:
            from rtanalyzer.measurements.network_design import read_network

            network = read_network(args.network)
        path = items[0]
        if path.lower().endswith(".json"):
            figures = _load_json(path)
        else:
            from rtanalyzer.cli.quadrature_capture import quadrature_figures

            figures = quadrature_figures(path, args.tone or (), args.band, args.calibration or ())
        kind = figures.get("measurement")
        if kind == "quadrature":
            out = diagnose_quadrature(figures["points"], network, args.band)
        elif kind == "sideband":
            out = diagnose_sideband(figures["points"], network, args.band)
        else:
            raise MeasurementError(f"{path}: diagnose reads quadrature or sideband results, not {kind!r}")
        out["source"] = path
        out["calibration"] = figures.get("calibration", [])
        out["warnings"] = figures.get("warnings", [])
    emit(out, args.json, _text)
    return 0


def _figure(value: float, bound: bool | None) -> str:
    """A suppression from a diagnosis; a lower bound (errors within their noise) says so."""
    return f"at least {math.floor(value * 10.0) / 10.0:.1f} dB" if bound else f"{value:.1f} dB"


def _text(r: dict) -> list[str]:
    lines = []
    if r["measurement"] == "probe":
        worst = r["worst_suppression_db"]
        lines.append("readings: " + " -> ".join(f"{w:.1f} dB" for w in worst) + f" (worst over {len(r['tones_hz'])} tones)")
    elif r["data"] == "quadrature":
        amp = _figure(r["amplitude_alone_limit_db"], r.get("amplitude_alone_is_lower_bound"))
        phase = _figure(r["phase_alone_limit_db"], r.get("phase_alone_is_lower_bound"))
        worst = (f"{_figure(r['now_worst_predicted_suppression_db'], r.get('now_worst_is_lower_bound'))} at "
                 f"{r['now_worst_frequency_hz']:.0f} Hz")
        if r["limited_now_by"]:
            now = (f"now: worst {worst}; amplitude alone would allow {amp}, phase alone {phase}: "
                   f"{r['limited_now_by']} limits now")
        else:
            now = f"now: {r['summary']} (amplitude alone would allow {amp}, phase alone {phase})"
        lines += [
            f"{r['source']}: {r['points']} points in {r['band_hz'][0]:g}-{r['band_hz'][1]:g} Hz "
            f"(ripple from the {r['ripple_source']})",
            now,
            f"after both trims: worst "
            f"{_figure(r['after_trims_worst_predicted_suppression_db'], r.get('after_trims_worst_is_lower_bound'))} "
            f"at {r['after_trims_worst_frequency_hz']:.0f} Hz",
        ]
    else:
        lines.append(f"{r['source']}: {r['points']} sideband points in {r['band_hz'][0]:g}-{r['band_hz'][1]:g} Hz")
    lines += r["advice"]
    if r.get("calibration"):
        lines.append("calibration: " + ", ".join(r["calibration"]))
    lines += [f"warning: {w}" for w in r.get("warnings", [])]
    return lines
