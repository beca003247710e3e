"""Before/after: the change in every figure between two snapshots or two groups of snapshots.

A group's figure is the arithmetic mean of its members' dB values, with their standard
deviation and range as the spread. A figure that is only a bound (the unwanted sideband or an
IMD product under the noise) makes the mean a bound in the same direction, and the change a
bound too: "better by at least 3.1 dB", never a plain number that was not measured.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass
from typing import Any, Sequence

import numpy as np

from rtanalyzer.store.errors import StoreError
from rtanalyzer.store.snapshot import Snapshot
from rtanalyzer.store.spectrum import CompactSpectrum

#: Changes smaller than this read as "no change": the figures are shown to 0.1 dB, and the
#: stated accuracy of suppression is +-0.2 dB, so a smaller change is no evidence of a trim.
NO_CHANGE_DB = 0.1
#: Where a measured carrier lands differently by more than this, the plans differ (Hz).
CARRIER_TOLERANCE_HZ = 25.0
#: Two-tone PEP levels differing by more than this make IMD figures hard to compare (dB).
PEP_TOLERANCE_DB = 1.0

EXACT, AT_LEAST, AT_MOST = "exact", "at least", "at most"


@dataclass(frozen=True)
class FigureValue:
    """One side's value of a figure: a snapshot's, or a group's mean over ``n`` members."""

    value: float
    kind: str  # EXACT, AT_LEAST (true value >= value) or AT_MOST (true value <= value)
    n: int
    spread_db: float  # sample standard deviation over the members (0 for one)
    low: float
    high: float

    def text(self, unit: str) -> str:
        bound = "" if self.kind == EXACT else f"{self.kind} "
        out = f"{bound}{self.value:.1f} {unit}"
        if self.n > 1:
            out += f" (mean of {self.n}, ±{self.spread_db:.1f})"
        return out


@dataclass(frozen=True)
class FigureChange:
    """The change of one figure from A to B and which way is better."""

    key: str
    label: str
    unit: str
    larger_is_better: bool
    a: FigureValue | None
    b: FigureValue | None
    change_db: float | None  # B - A
    change_kind: str  # EXACT, AT_LEAST, AT_MOST, or "unknown"
    verdict: str  # "better", "worse", "no change", "unknown" or "missing"
    text: str  # e.g. "better by 3.2 dB", "better by at least 4.0 dB (a bound)"


@dataclass(frozen=True)
class Side:
    """A or B: one snapshot or a group."""

    selector: str
    ids: tuple[int | None, ...]
    measurement: str
    rigs: tuple[str, ...]

    @property
    def is_group(self) -> bool:
        return len(self.ids) > 1


@dataclass(frozen=True)
class Comparison:
    """Every figure's change from A to B, and what makes the comparison doubtful."""

    a: Side
    b: Side
    measurement: str
    figures: tuple[FigureChange, ...]
    flags: tuple[str, ...]

    def figure(self, key: str) -> FigureChange:
        for f in self.figures:
            if f.key == key:
                return f
        raise KeyError(key)

    def to_json(self) -> dict[str, Any]:
        return {
            "measurement": self.measurement,
            "a": {**asdict(self.a), "ids": list(self.a.ids), "rigs": list(self.a.rigs)},
            "b": {**asdict(self.b), "ids": list(self.b.ids), "rigs": list(self.b.rigs)},
            "figures": [_round_json(asdict(f)) for f in self.figures],
            "flags": list(self.flags),
        }


def _round_json(value: Any) -> Any:
    if isinstance(value, float):
        return round(value, 3)
    if isinstance(value, dict):
        return {k: _round_json(v) for k, v in value.items()}
    return value


# -- figures of one snapshot ---------------------------------------------------------------------

# (key, label, unit, larger is better, value, bound kind or EXACT)
_Figure = tuple[str, str, str, bool, float, str]


def figures_of(result: dict[str, Any]) -> list[_Figure]:
    """Every comparable figure of one measurement's JSON, in reading order."""
    name = result.get("measurement")
    out: list[_Figure] = []
    if name == "sideband":
        for p in result.get("points") or ():
            v = p.get("sideband_suppression_db")
            if v is not None:
                out.append((f"sideband_suppression_db@{p['tone_hz']:g}",
                            f"opposite-sideband suppression at {p['tone_hz']:g} Hz", "dB", True, v,
                            EXACT if p.get("unwanted_detected") else AT_LEAST))
        v = result.get("worst_sideband_suppression_db")
        if v is not None:
            out.append(("worst_sideband_suppression_db", "worst opposite-sideband suppression", "dB", True, v,
                        AT_LEAST if result.get("worst_is_lower_bound") else EXACT))
        v = result.get("carrier_suppression_db")
        if v is not None:
            out.append(("carrier_suppression_db", "carrier suppression", "dBc", True, v,
                        EXACT if result.get("carrier_detected") else AT_LEAST))
    elif name == "twotone":
        for o in result.get("imd") or ():
            order = o.get("order")
            v = o.get("worst_db_pep")
            if v is not None:
                out.append((f"imd{order}_worst_db_pep", f"IMD{order} worst, dB PEP", "dB PEP", False, v,
                            AT_MOST if o.get("worst_is_bound") else EXACT))
            dbc = [(o.get(f"{s}_dbc"), o.get(f"{s}_detected")) for s in ("lower", "upper") if o.get(f"{s}_dbc") is not None]
            if dbc:
                v, detected = max(dbc, key=lambda d: d[0])
                out.append((f"imd{order}_worst_dbc", f"IMD{order} worst, dBc", "dBc", False, v,
                            EXACT if detected else AT_MOST))
        v = result.get("worst_imd_db_pep")
        if v is not None:
            out.append(("worst_imd_db_pep", "worst IMD (any order), dB PEP", "dB PEP", False, v,
                        AT_MOST if result.get("worst_imd_is_bound") else EXACT))
    v = result.get("noise_floor_dbfs")
    if v is not None:
        bw = result.get("analysis_bandwidth_hz")
        where = f" in {bw:.2f} Hz" if isinstance(bw, (int, float)) else ""
        out.append(("noise_floor_dbfs", f"noise floor{where}", "dBFS", False, v, EXACT))
    return out


# -- groups and changes ------------------------------------------------------------------------------


def _group_value(values: list[tuple[float, str]]) -> FigureValue:
    """Mean in dB over the members; a bound when any member is one (arithmetic)."""
    numbers = np.array([v for v, _ in values], dtype=float)
    kinds = {k for _, k in values} - {EXACT}
    if len(kinds) > 1:
        raise StoreError("a figure mixes lower and upper bounds across the group")  # cannot happen per figure
    kind = kinds.pop() if kinds else EXACT
    spread = float(np.std(numbers, ddof=1)) if numbers.size > 1 else 0.0
    return FigureValue(float(numbers.mean()), kind, int(numbers.size), spread, float(numbers.min()), float(numbers.max()))


def _change(a: FigureValue, b: FigureValue) -> tuple[float, str]:
    """B - A and what it is: exact, a lower bound ("at least"), an upper bound, or unknown."""
    delta = b.value - a.value
    # The true B - A is bounded below when B can only be larger and A only smaller, and so on.
    b_dir = {EXACT: 0, AT_LEAST: 1, AT_MOST: -1}[b.kind]
    a_dir = {EXACT: 0, AT_LEAST: -1, AT_MOST: 1}[a.kind]  # as it enters with a minus sign
    dirs = {d for d in (b_dir, a_dir) if d}
    if not dirs:
        return delta, EXACT
    if len(dirs) == 2:
        return delta, "unknown"
    return delta, AT_LEAST if dirs.pop() == 1 else AT_MOST


def _verdict(delta: float, kind: str, larger_is_better: bool, a: FigureValue, b: FigureValue) -> tuple[str, str]:
    if kind == "unknown":
        return "unknown", "no change can be stated: both figures are only bounds, in opposite senses"
    gain = delta if larger_is_better else -delta
    if kind == EXACT:
        if abs(gain) < NO_CHANGE_DB:
            return "no change", f"no change (less than {NO_CHANGE_DB:g} dB)"
        verdict = "better" if gain > 0 else "worse"
        text = f"{verdict} by {abs(gain):.1f} dB"
        spread = max(a.spread_db, b.spread_db)
        if spread and abs(gain) <= spread:
            text += f" (within the groups' spread of ±{spread:.1f} dB)"
        return verdict, text
    # A bound on the change; flip its sense when smaller is better.
    gain_kind = kind if larger_is_better else (AT_MOST if kind == AT_LEAST else AT_LEAST)
    if gain_kind == AT_LEAST:
        if gain > 0:
            return "better", f"better by at least {gain:.1f} dB (a bound: one figure is under the noise)"
        return "unknown", f"at worst {-gain:.1f} dB worse (a bound: one figure is under the noise)"
    if gain < 0:
        return "worse", f"worse by at least {-gain:.1f} dB (a bound: one figure is under the noise)"
    return "unknown", f"at best {gain:.1f} dB better (a bound: one figure is under the noise)"


def _side(selector: str, snapshots: Sequence[Snapshot]) -> Side:
    if not snapshots:
        raise StoreError(f"{selector}: no snapshots to compare")
    names = {s.measurement for s in snapshots}
    if len(names) > 1:
        raise StoreError(f"{selector} mixes measurements ({', '.join(sorted(names))}): compare like with like")
    return Side(selector, tuple(s.id for s in snapshots), names.pop(), tuple(sorted({s.rig for s in snapshots})))


def _plan_of(s: Snapshot) -> tuple[tuple[float, ...], float | None, str]:
    tones = tuple(sorted(round(float(t), 1) for t in (s.plan.get("tones_hz") or ())))
    carrier = s.result.get("carrier_hz")
    if carrier is None:
        carrier = s.plan.get("carrier_hz")
    return tones, carrier, s.plan.get("view") or "real"


def _flags(a_side: Side, b_side: Side, a: Sequence[Snapshot], b: Sequence[Snapshot]) -> list[str]:
    flags: list[str] = []
    for side, members in ((a_side, a), (b_side, b)):
        tones = {_plan_of(s)[0] for s in members}
        if len(tones) > 1:
            flags.append(f"{side.selector} mixes frequency plans (tones {' / '.join(_tones_text(t) for t in sorted(tones))})")
    ta = {_plan_of(s)[0] for s in a}
    tb = {_plan_of(s)[0] for s in b}
    if ta != tb:
        flags.append(
            f"different plans: tones {' / '.join(_tones_text(t) for t in sorted(ta))} in {a_side.selector}, "
            f"{' / '.join(_tones_text(t) for t in sorted(tb))} in {b_side.selector}"
        )
    ca = [c for c in (_plan_of(s)[1] for s in a) if c is not None]
    cb = [c for c in (_plan_of(s)[1] for s in b) if c is not None]
    if ca and cb and abs(float(np.mean(ca)) - float(np.mean(cb))) > CARRIER_TOLERANCE_HZ:
        flags.append(
            f"different plans: the carrier lands at {np.mean(ca):.1f} Hz in {a_side.selector} and "
            f"{np.mean(cb):.1f} Hz in {b_side.selector}"
        )
    va = {_plan_of(s)[2] for s in a}
    vb = {_plan_of(s)[2] for s in b}
    if va != vb:
        flags.append(f"different views: {'/'.join(sorted(va))} in {a_side.selector}, {'/'.join(sorted(vb))} in {b_side.selector}")
    bw_a = {s.result.get("analysis_bandwidth_hz") for s in a}
    bw_b = {s.result.get("analysis_bandwidth_hz") for s in b}
    if bw_a != bw_b:
        flags.append(
            "different analysis bandwidths "
            f"({_set_text(bw_a, 'Hz')} vs {_set_text(bw_b, 'Hz')}): noise floors are per bandwidth, "
            "so their change is not a change of the noise itself"
        )
    if a_side.measurement == "twotone":
        pa = [s.result.get("pep_dbfs") for s in a if s.result.get("pep_dbfs") is not None]
        pb = [s.result.get("pep_dbfs") for s in b if s.result.get("pep_dbfs") is not None]
        if pa and pb and abs(float(np.mean(pa)) - float(np.mean(pb))) > PEP_TOLERANCE_DB:
            flags.append(
                f"different drive: PEP {np.mean(pa):.1f} dBFS in {a_side.selector}, {np.mean(pb):.1f} dBFS in "
                f"{b_side.selector}; IMD depends strongly on drive"
            )
    if set(a_side.rigs) != set(b_side.rigs):
        flags.append(f"different rigs: {', '.join(a_side.rigs)} vs {', '.join(b_side.rigs)}")
    clipped = [s.label for s in (*a, *b) if s.clipped]
    if clipped:
        flags.append(f"clipped capture in {', '.join(clipped)}: those figures are not valid")
    return flags


def _tones_text(tones: tuple[float, ...]) -> str:
    return "+".join(f"{t:g}" for t in tones) + " Hz" if tones else "(none)"


def _set_text(values: set, unit: str) -> str:
    shown = sorted(v for v in values if v is not None)
    return "/".join(f"{v:g}" for v in shown) + f" {unit}" if shown else "unknown"


def compare(a: Sequence[Snapshot], b: Sequence[Snapshot], a_selector: str = "A", b_selector: str = "B") -> Comparison:
    """Compare snapshot(s) ``a`` (before) with ``b`` (after).

    Parameters
    ----------
    a, b : sequence of Snapshot
        One snapshot each, or groups; a group's figures are averaged in dB.
    a_selector, b_selector : str
        How they were chosen (``"#12"``, ``"tag:before"``), for the text.

    Returns
    -------
    Comparison
        A :class:`FigureChange` for every figure either side has, and flags for what makes
        the comparison doubtful (different plans, views, bandwidths, drive, rigs, clipping).

    Raises
    ------
    StoreError
        When a side is empty, mixes measurements, or the two sides are different measurements.

    Examples
    --------
    >>> from rtanalyzer.store.snapshot import Snapshot
    >>> def snap(v):
    ...     r = {"measurement": "sideband", "points": [], "worst_sideband_suppression_db": v,
    ...          "worst_is_lower_bound": False}
    ...     return Snapshot("sideband", r, "2025-01-01T00:00:00.000Z", 0.0)
    >>> compare([snap(32.4)], [snap(41.0)]).figure("worst_sideband_suppression_db").text
    'better by 8.6 dB'
    """
    a_side, b_side = _side(a_selector, a), _side(b_selector, b)
    if a_side.measurement != b_side.measurement:
        raise StoreError(
            f"{a_selector} is a {a_side.measurement} measurement and {b_selector} a {b_side.measurement} "
            "one: they share no figures to compare"
        )
    order: list[str] = []
    meta: dict[str, tuple[str, str, bool]] = {}
    values: dict[str, tuple[list, list]] = {}
    for index, group in enumerate((a, b)):
        for s in group:
            for key, label, unit, larger, value, kind in figures_of(s.result):
                if key not in meta:
                    order.append(key)
                    meta[key] = (label, unit, larger)
                    values[key] = ([], [])
                values[key][index].append((float(value), kind))
    changes = []
    for key in order:
        label, unit, larger = meta[key]
        va = _group_value(values[key][0]) if values[key][0] else None
        vb = _group_value(values[key][1]) if values[key][1] else None
        if va is None or vb is None:
            missing = a_selector if va is None else b_selector
            changes.append(FigureChange(key, label, unit, larger, va, vb, None, "unknown", "missing",
                                        f"not in {missing}"))
            continue
        delta, kind = _change(va, vb)
        verdict, text = _verdict(delta, kind, larger, va, vb)
        changes.append(FigureChange(key, label, unit, larger, va, vb, delta, kind, verdict, text))
    return Comparison(a_side, b_side, a_side.measurement, tuple(changes), tuple(_flags(a_side, b_side, a, b)))


def render_comparison(c: Comparison) -> str:
    """The comparison as a table a person reads."""

    def side_text(side: Side) -> str:
        ids = ", ".join(f"#{i}" for i in side.ids)
        return side.selector if not side.is_group else f"{side.selector} ({len(side.ids)} snapshots: {ids})"

    lines = [f"{c.measurement} · A = {side_text(c.a)} · B = {side_text(c.b)}"]
    rows = []
    for f in c.figures:
        a = f.a.text(f.unit) if f.a else "—"
        b = f.b.text(f.unit) if f.b else "—"
        change = "—" if f.change_db is None else change_text(f.change_db)
        rows.append((f.label, a, b, change, f.text))
    head = ("figure", "A", "B", "B - A", "")
    widths = [max(len(r[i]) for r in [head, *rows]) for i in range(4)]
    fmt = f"{{:<{widths[0]}}}  {{:>{widths[1]}}}  {{:>{widths[2]}}}  {{:>{widths[3]}}}  {{}}"
    lines.append(fmt.format(*head).rstrip())
    lines += [fmt.format(*r) for r in rows]
    lines += [f"caution: {flag}" for flag in c.flags]
    return "\n".join(lines)


def change_text(delta_db: float) -> str:
    """B - A with its sign, e.g. "+2.1 dB"; below 0.1 dB two decimals ("-0.06 dB"), zero "0.00 dB"."""
    text = f"{delta_db:+.1f}" if abs(delta_db) >= 0.095 else f"{delta_db:+.2f}"
    return ("0.00" if text in ("+0.00", "-0.00") else text) + " dB"


def spectrum_arrays(snapshot: Snapshot) -> tuple[np.ndarray, np.ndarray]:
    """(frequencies in Hz, levels in dBFS) of a snapshot's stored spectrum, to draw or overlay.

    Raises
    ------
    StoreError
        When the snapshot has no spectrum loaded (get it with ``SnapshotStore.get``).
    """
    spectrum: CompactSpectrum | None = snapshot.spectrum
    if spectrum is None:
        raise StoreError(f"snapshot {snapshot.label} has no stored spectrum")
    return spectrum.frequencies_hz, spectrum.levels_db.astype(np.float64)
