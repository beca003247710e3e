"""A self-contained HTML report of snapshots or of a before/after comparison.

Everything is inline: CSS in a ``<style>`` element, plots as SVG drawn by
:mod:`rtanalyzer.store.svg`. No scripts, no fonts, no images or links to fetch, so the file
reads the same offline, mailed, or years later.
"""

from __future__ import annotations

from datetime import datetime
from html import escape
from typing import Any, Sequence

import numpy as np

from rtanalyzer.store.comparison import Comparison, change_text, figures_of
from rtanalyzer.store.snapshot import Snapshot
from rtanalyzer.store.svg import Trace, spectrum_svg, timeline_svg

#: Snapshots given a section of their own at most (the timeline still shows all).
MAX_SECTIONS = 100
#: Key figure drawn over time, per measurement: (JSON key, bound flag key, title, unit).
TIMELINE = {
    "sideband": ("worst_sideband_suppression_db", "worst_is_lower_bound", "worst opposite-sideband suppression", "dB"),
    "twotone": ("worst_imd_db_pep", "worst_imd_is_bound", "worst IMD", "dB PEP"),
}

_CSS = """
body { font-family: sans-serif; margin: 2em auto; max-width: 900px; color: #222; line-height: 1.4; }
h1 { font-size: 1.5em; margin-bottom: 0.2em; }
h2 { font-size: 1.2em; border-bottom: 1px solid #bbb; margin-top: 2em; }
h3 { font-size: 1.05em; margin-bottom: 0.3em; }
table { border-collapse: collapse; margin: 0.5em 0 1em; font-size: 0.92em; }
th, td { border: 1px solid #ccc; padding: 3px 8px; text-align: left; vertical-align: top; }
th { background: #f1f1f1; }
td.num { text-align: right; font-variant-numeric: tabular-nums; }
.better { color: #1b5e20; font-weight: bold; }
.worse { color: #b71c1c; font-weight: bold; }
.muted { color: #666; font-size: 0.9em; }
.caution { background: #fff6e0; border: 1px solid #e0b040; padding: 0.6em 1em; }
.flags { background: #fdecea; border: 1px solid #d9534f; padding: 0.4em 1em; }
.note { white-space: pre-wrap; background: #f7f7f7; padding: 0.4em 0.8em; border-left: 3px solid #999; }
.tag { display: inline-block; background: #e8eef7; border-radius: 3px; padding: 0 6px; margin-right: 4px; }
svg { max-width: 100%; height: auto; }
"""


def local_time(epoch: float) -> str:
    """Local time of the machine with its UTC offset, e.g. ``2025-01-02 19:04:05 +01:00``."""
    return datetime.fromtimestamp(epoch).astimezone().isoformat(sep=" ", timespec="seconds").replace("T", " ")


def plot_range(snapshots: Sequence[Snapshot]) -> tuple[float, float] | None:
    """Frequencies worth showing: the measured components with a margin, within the stored spectra."""
    freqs = [f for s in snapshots for f, _ in components(s.result)]
    spectra = [s.spectrum for s in snapshots if s.spectrum is not None]
    if not spectra:
        return None
    low_limit = min(sp.start_hz for sp in spectra)
    high_limit = max(sp.stop_hz for sp in spectra)
    if not freqs:
        return low_limit, high_limit
    lo, hi = min(freqs), max(freqs)
    margin = max(0.15 * (hi - lo), 300.0)
    return max(lo - margin, low_limit), min(hi + margin, high_limit)


def components(result: dict[str, Any]) -> list[tuple[float, str]]:
    """(frequency, short label) of each component a measurement located."""
    out: list[tuple[float, str]] = []
    if result.get("measurement") == "sideband":
        if result.get("carrier_hz") is not None:
            out.append((result["carrier_hz"], "C"))
        for p in result.get("points") or ():
            if p.get("wanted_hz") is not None:
                out.append((p["wanted_hz"], "W"))
            if p.get("unwanted_hz") is not None:
                out.append((p["unwanted_hz"], "U"))
    elif result.get("measurement") == "twotone":
        out += [(f, "T") for f in result.get("tone_hz") or () if f is not None]
        for o in result.get("imd") or ():
            for side in ("lower", "upper"):
                if o.get(f"{side}_hz") is not None:
                    out.append((o[f"{side}_hz"], str(o["order"])))
    return out


def _side_trace(snapshots: Sequence[Snapshot], label: str) -> Trace | None:
    """One trace for a side: the snapshot's spectrum, or the dB mean of a group on a common grid."""
    spectra = [s.spectrum for s in snapshots if s.spectrum is not None]
    if not spectra:
        return None
    first = spectra[-1]
    same = [sp for sp in spectra if (sp.start_hz, sp.step_hz, sp.levels_db.size) == (first.start_hz, first.step_hz, first.levels_db.size)]
    if len(same) > 1:
        levels = np.mean([sp.levels_db.astype(float) for sp in same], axis=0)
        label = f"{label} (mean of {len(same)})"
    else:
        levels = first.levels_db.astype(float)
    return Trace(first.frequencies_hz, levels, label)


def _figures_table(s: Snapshot) -> str:
    rows = []
    for _, label, unit, _, value, kind in figures_of(s.result):
        bound = "" if kind == "exact" else f"{kind} "
        rows.append(f"<tr><td>{escape(label)}</td><td class='num'>{escape(bound)}{value:.1f} {escape(unit)}</td></tr>")
    r = s.result
    if r.get("measurement") == "twotone" and r.get("pep_dbfs") is not None:
        tones = ", ".join(f"{f:.1f} Hz {l:.1f} dBFS" for f, l in zip(r.get("tone_hz") or (), r.get("tone_dbfs") or ()))
        rows.append(f"<tr><td>tones; PEP</td><td class='num'>{escape(tones)}; {r['pep_dbfs']:.1f} dBFS</td></tr>")
    if r.get("measurement") == "sideband":
        for p in r.get("points") or ():
            if p.get("wanted_dbfs") is not None:
                rows.append(
                    f"<tr><td>wanted / unwanted at {p['tone_hz']:g} Hz</td><td class='num'>"
                    f"{p['wanted_hz']:.1f} Hz {p['wanted_dbfs']:.1f} dBFS / {p['unwanted_hz']:.1f} Hz "
                    f"{'' if p.get('unwanted_detected') else 'under the noise, '}{p['unwanted_dbfs']:.1f} dBFS</td></tr>"
                )
    if not rows:
        rows.append("<tr><td colspan='2'>no figures</td></tr>")
    return "<table><tr><th>figure</th><th>value</th></tr>" + "".join(rows) + "</table>"


def _setup_table(s: Snapshot) -> str:
    plan = s.plan or {}
    tones = ", ".join(f"{t:g}" for t in plan.get("tones_hz") or ()) or "—"
    carrier = "found from the capture" if plan.get("carrier_hz") is None else f"{plan['carrier_hz']:g} Hz"
    view = "I/Q (I left, Q right)" if plan.get("view") == "iq" else f"channel {plan.get('channel') or 1}"
    gen = "—"
    if s.generator:
        gen = ", ".join(f"{k} {v}" for k, v in s.generator.items())
    extra = ", ".join(f"{k}: {v}" for k, v in (s.setup or {}).items()) or "—"
    xruns = ", ".join(f"{k.replace('_', ' ')} {v}" for k, v in (s.xruns or {}).items()) or "— (not a live capture)"
    rows = [
        ("taken", f"{local_time(s.created_epoch)} (UTC {s.created_utc}), {s.origin}"),
        ("rig", s.rig),
        ("source", f"{s.source}: {s.device}"),
        ("sample rate", f"{s.sample_rate_hz:g} Hz"),
        ("plan", f"tones {tones} Hz; carrier {carrier}; wanted side {plan.get('wanted', 'auto')}; {view}"),
        ("generator", gen),
        ("set-up", extra),
        ("calibration in force", ", ".join(s.calibration) or "none (no calibration profiles applied)"),
        ("clipping", "CLIPPED: figures not valid" if s.clipped else "no clipping"),
        ("overflows / underflows", xruns),
    ]
    if s.levels:
        rows.append(("input levels", _levels_text(s.levels)))
    body = "".join(f"<tr><th>{escape(k)}</th><td>{escape(str(v))}</td></tr>" for k, v in rows)
    return f"<table>{body}</table>"


def _levels_text(levels: dict[str, Any]) -> str:
    peaks = levels.get("peak_dbfs")
    rms = levels.get("rms_dbfs")
    if isinstance(peaks, list) and isinstance(rms, list):
        return "; ".join(f"ch {i + 1}: peak {p:.1f} dBFS, RMS {r:.1f} dBFS" for i, (p, r) in enumerate(zip(peaks, rms))
                         if p is not None and r is not None)
    return ", ".join(f"{k} {v}" for k, v in levels.items())


def _section(s: Snapshot) -> str:
    tags = "".join(f"<span class='tag'>{escape(t)}</span>" for t in s.tags)
    parts = [f"<h3>#{s.id} · {escape(local_time(s.created_epoch))} · {escape(s.measurement)} · rig {escape(s.rig)} {tags}</h3>"]
    if s.note:
        parts.append(f"<div class='note'>{escape(s.note)}</div>")
    parts.append(_figures_table(s))
    warnings = s.result.get("warnings") or []
    if warnings:
        parts.append("<ul>" + "".join(f"<li>warning: {escape(str(w))}</li>" for w in warnings) + "</ul>")
    parts.append(_setup_table(s))
    rng = plot_range([s])
    if s.spectrum is not None and rng is not None:
        trace = Trace(s.spectrum.frequencies_hz, s.spectrum.levels_db.astype(float), f"#{s.id}")
        parts.append(spectrum_svg([trace], rng, components(s.result), f"spectrum of #{s.id}"))
        parts.append(
            f"<p class='muted'>Stored trace: the largest of each {s.spectrum.pooled} analysis bins of "
            f"{s.spectrum.bin_hz:.3g} Hz (analysis bandwidth {s.spectrum.enbw_hz:.3g} Hz), so components keep their "
            "level and the noise between them reads a few dB high. C carrier, W wanted, U unwanted, "
            "T tones, 3/5/7/9 IMD orders.</p>"
        )
    return "\n".join(parts)


def _comparison_html(c: Comparison, a: Sequence[Snapshot], b: Sequence[Snapshot]) -> str:
    def side(sel: str, snaps: Sequence[Snapshot]) -> str:
        ids = ", ".join(f"#{s.id}" for s in snaps)
        return f"{escape(sel)} ({ids})" if len(snaps) > 1 else escape(sel)

    parts = [f"<h2>Before / after: A = {side(c.a.selector, a)}, B = {side(c.b.selector, b)}</h2>"]
    if c.flags:
        parts.append("<div class='flags'><strong>Read with care:</strong><ul>"
                     + "".join(f"<li>{escape(f)}</li>" for f in c.flags) + "</ul></div>")
    rows = []
    for f in c.figures:
        cls = "better" if f.verdict == "better" else "worse" if f.verdict == "worse" else ""
        rows.append(
            f"<tr><td>{escape(f.label)}</td><td class='num'>{escape(f.a.text(f.unit) if f.a else '—')}</td>"
            f"<td class='num'>{escape(f.b.text(f.unit) if f.b else '—')}</td>"
            f"<td class='num'>{'—' if f.change_db is None else change_text(f.change_db)}</td>"
            f"<td class='{cls}'>{escape(f.text)}</td></tr>"
        )
    parts.append("<table><tr><th>figure</th><th>A</th><th>B</th><th>B − A</th><th>verdict</th></tr>"
                 + "".join(rows) + "</table>")
    parts.append("<p class='muted'>Larger suppression is better; IMD in dB PEP and dBc, and the noise floor, "
                 "are better more negative. A group's figure is the mean of its members in dB, ± their standard "
                 "deviation. Where a figure is only a bound (under the noise), its change is a bound too.</p>")
    traces = [t for t in (_side_trace(a, f"A {c.a.selector}"), _side_trace(b, f"B {c.b.selector}")) if t is not None]
    rng = plot_range([*a, *b])
    if traces and rng is not None:
        markers = components((b or a)[-1].result)
        parts.append(spectrum_svg(traces, rng, markers, "spectra, A and B overlaid"))
    return "\n".join(parts)


def render_report(
    snapshots: Sequence[Snapshot],
    cautions: str,
    comparison: tuple[Comparison, Sequence[Snapshot], Sequence[Snapshot]] | None = None,
    selection: str = "",
    store_path: str = "",
    generated_epoch: float | None = None,
) -> str:
    """The report as one HTML document.

    Parameters
    ----------
    snapshots : sequence of Snapshot
        Snapshots to describe (with spectra loaded), oldest first.
    cautions : str
        The safety cautions to print in the report (lines; a line starting with "- " is an item).
    comparison : (Comparison, A snapshots, B snapshots), optional
        A before/after comparison to put first.
    selection, store_path : str
        What was selected, and from where, for the header.
    """
    import time

    generated = local_time(time.time() if generated_epoch is None else generated_epoch)
    title = "rtanalyzer history report"
    body = [f"<h1>{title}</h1>",
            f"<p class='muted'>Made {escape(generated)} from {escape(store_path) or 'the history store'}"
            f"{' · ' + escape(selection) if selection else ''} · {len(snapshots)} snapshot"
            f"{'s' if len(snapshots) != 1 else ''}.</p>"]
    body.append(_cautions_html(cautions))
    if comparison is not None:
        body.append(_comparison_html(*comparison))
    by_measurement: dict[str, list[Snapshot]] = {}
    for s in snapshots:
        by_measurement.setdefault(s.measurement, []).append(s)
    for name, group in by_measurement.items():
        if len(group) > 1 and name in TIMELINE:
            key, bound_key, label, unit = TIMELINE[name]
            points = [(f"#{s.id}", s.result.get(key), bool(s.result.get(bound_key))) for s in group]
            body.append(f"<h2>{escape(label.capitalize())} over time</h2>")
            body.append(timeline_svg(points, f"{label} ({name}); hollow: only a bound", unit))
            body.append(f"<p class='muted'>From #{group[0].id} ({escape(local_time(group[0].created_epoch))}) to "
                        f"#{group[-1].id} ({escape(local_time(group[-1].created_epoch))}).</p>")
    body.append("<h2>Snapshots</h2>")
    shown = list(snapshots)[-MAX_SECTIONS:]
    if len(shown) < len(snapshots):
        body.append(f"<p class='muted'>The newest {MAX_SECTIONS} of {len(snapshots)} snapshots are described below.</p>")
    body += [_section(s) for s in shown]
    return (
        "<!DOCTYPE html>\n<html lang='en'>\n<head>\n<meta charset='utf-8'>\n"
        f"<title>{title}</title>\n<style>{_CSS}</style>\n</head>\n<body>\n" + "\n".join(body) + "\n</body>\n</html>\n"
    )


def _cautions_html(cautions: str) -> str:
    lines = [line for line in cautions.splitlines() if line.strip()]
    head, items, tail = [], [], []
    for line in lines:
        if line.startswith("- "):
            items.append(line[2:].strip())
        elif line.startswith("  ") and items:
            items[-1] += " " + line.strip()
        elif items:
            tail.append(line)
        else:
            head.append(line)
    return (
        "<div class='caution'><strong>" + escape(" ".join(head) or "Safety cautions") + "</strong><ul>"
        + "".join(f"<li>{escape(i)}</li>" for i in items) + "</ul>"
        + "".join(f"<p>{escape(t)}</p>" for t in tail) + "</div>"
    )
