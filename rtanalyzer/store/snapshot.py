"""A snapshot: one measurement's figures with everything needed to judge and redraw it later.

Times are kept in UTC (ISO 8601 text and seconds since the epoch, from the same instant);
figures are the measurement's JSON exactly as the measurement produced it, so nothing is
recomputed or rounded again when it is read back.
"""

from __future__ import annotations

import dataclasses
import math
import re
import uuid
from dataclasses import dataclass, field
from datetime import datetime, timezone
from typing import TYPE_CHECKING, Any, Mapping

import numpy as np

from rtanalyzer.store.errors import StoreError
from rtanalyzer.store.spectrum import CompactSpectrum, compact_spectrum

if TYPE_CHECKING:
    from rtanalyzer.dsp.spectrum import Spectrum

DEFAULT_RIG = "default"
#: How a snapshot was taken.
ORIGINS = ("analyze", "live-end", "live-best")
IMD_ORDERS = (3, 5, 7, 9)
MAX_NAME = 80
MAX_NOTE = 20_000
_BAD_NAME = re.compile(r"[\x00-\x1f\x7f]")


def check_name(kind: str, value: str) -> str:
    """A rig or tag name: 1..80 printable characters, no surrounding spaces."""
    if not isinstance(value, str) or not value.strip():
        raise StoreError(f"{kind} name {value!r} is empty; give 1 to {MAX_NAME} printable characters")
    if value != value.strip() or len(value) > MAX_NAME or _BAD_NAME.search(value):
        raise StoreError(
            f"{kind} name {value!r} is not allowed; give 1 to {MAX_NAME} printable characters "
            "without control characters or surrounding spaces"
        )
    return value


def _check_profile(value: str) -> str:
    """A calibration profile's name (or the path it was given by)."""
    if not isinstance(value, str) or not value or len(value) > 4096 or _BAD_NAME.search(value):
        raise StoreError(f"calibration profile name {value!r} is not allowed (empty, control characters or too long)")
    return value


def check_note(value: str) -> str:
    if not isinstance(value, str) or len(value) > MAX_NOTE or "\x00" in value:
        raise StoreError(f"note of {len(str(value))} characters: allowed up to {MAX_NOTE}, no NUL characters")
    return value


def utc_now() -> tuple[str, float]:
    """(ISO 8601 UTC text with milliseconds and 'Z', epoch seconds) of one instant."""
    now = datetime.now(timezone.utc)
    return iso_utc(now.timestamp()), now.timestamp()


def iso_utc(epoch: float) -> str:
    text = datetime.fromtimestamp(epoch, timezone.utc).isoformat(timespec="milliseconds")
    return text.replace("+00:00", "Z")


#: Snapshot fields kept as plain text, and as numbers, in every stored and exported form.
TEXT_FIELDS = ("uid", "created_utc", "rig", "origin", "measurement", "source", "device")
NUMBER_FIELDS = ("created_epoch", "sample_rate_hz")


@dataclass(frozen=True)
class Snapshot:
    """One stored measurement.

    Attributes
    ----------
    measurement : str
        Plugin name (``"sideband"``, ``"twotone"`` or a third-party one).
    result : dict
        The measurement's JSON (``to_json()``), unchanged.
    created_utc, created_epoch :
        When it was taken: ISO 8601 UTC text and seconds since 1970-01-01 UTC.
    rig : str
        The rig or bench it belongs to (user-named).
    origin : str
        How it was taken: one of :data:`ORIGINS`.
    source, device : str
        ``"file"``, ``"sim"`` or ``"device"``, and what exactly (file path, sound card, bench).
    sample_rate_hz : float
    plan : dict
        Frequency plan: ``tones_hz``, ``carrier_hz`` (None: found from the capture),
        ``wanted`` (above/below/auto), ``view`` ("real" or "iq"), ``channel``, ``resolution_hz``.
    generator : dict or None
        The test signal that drove the exciter (kind and parameters), when known.
    setup : dict
        Other facts of the set-up (file format and length, simulated bench knobs...).
    calibration : tuple of str
        Names of the calibration profiles in force (as the result lists them under "calibration").
    spectrum : CompactSpectrum or None
        The averaged spectrum the figures came from, compacted; None when not loaded.
    clipped : bool
        Any analysed channel touched full scale.
    levels : dict or None
        Input meters (peak/RMS dBFS per channel, clip lights) of a live snapshot.
    xruns : dict
        Overflow/underflow/dropped-block counters of a live snapshot (empty for a file).
    note : str
    tags : tuple of str
        Sorted, unique.
    id : int or None
        Assigned by the store.
    uid : str
        Globally unique text id; an import skips snapshots whose uid is already present.
    """

    measurement: str
    result: dict[str, Any]
    created_utc: str
    created_epoch: float
    rig: str = DEFAULT_RIG
    origin: str = "analyze"
    source: str = "file"
    device: str = ""
    sample_rate_hz: float = 0.0
    plan: dict[str, Any] = field(default_factory=dict)
    generator: dict[str, Any] | None = None
    setup: dict[str, Any] = field(default_factory=dict)
    calibration: tuple[str, ...] = ()
    spectrum: CompactSpectrum | None = None
    clipped: bool = False
    levels: dict[str, Any] | None = None
    xruns: dict[str, int] = field(default_factory=dict)
    note: str = ""
    tags: tuple[str, ...] = ()
    id: int | None = None
    uid: str = field(default_factory=lambda: uuid.uuid4().hex)

    def __post_init__(self) -> None:
        check_name("rig", self.rig)
        check_name("measurement", self.measurement)
        check_note(self.note)
        if self.origin not in ORIGINS:
            raise StoreError(f"snapshot origin {self.origin!r}: allowed {', '.join(ORIGINS)}")
        if not isinstance(self.result, Mapping):
            raise StoreError("snapshot result must be the measurement's JSON object")
        if not math.isfinite(self.created_epoch):
            raise StoreError(f"snapshot time {self.created_epoch!r} is not a finite number of seconds")
        object.__setattr__(self, "tags", tuple(sorted({check_name("tag", t) for t in self.tags})))
        object.__setattr__(self, "calibration", tuple(_check_profile(c) for c in self.calibration))

    @classmethod
    def _trusted(cls, **fields: Any) -> Snapshot:
        """Build from fields read back from the store (checked when they were stored)."""
        obj = object.__new__(cls)
        for name, value in fields.items():
            object.__setattr__(obj, name, value)
        return obj

    def with_changes(self, **changes: Any) -> Snapshot:
        return dataclasses.replace(self, **changes)

    @property
    def label(self) -> str:
        return f"#{self.id}" if self.id is not None else "(unsaved)"

    def key_figures(self) -> dict[str, float | None]:
        """The figures kept as columns of the store (see :func:`key_figures`)."""
        return key_figures(self.result)


def key_figures(result: Mapping[str, Any]) -> dict[str, float | None]:
    """Worst opposite-sideband suppression, carrier suppression, worst IMD and per-order worst IMD.

    Keys are column names of the store; a figure the measurement does not give is None.
    """
    figures: dict[str, float | None] = {
        "worst_sideband_suppression_db": _number(result.get("worst_sideband_suppression_db")),
        "carrier_suppression_db": _number(result.get("carrier_suppression_db")),
        "worst_imd_db_pep": _number(result.get("worst_imd_db_pep")),
    }
    by_order = {}
    for row in result.get("imd") or ():
        if isinstance(row, Mapping):
            by_order[row.get("order")] = _number(row.get("worst_db_pep"))
    for order in IMD_ORDERS:
        figures[f"imd{order}_worst_db_pep"] = by_order.get(order)
    return figures


#: Bit of each key figure in the store's ``bound_flags`` column: set when the figure is only a
#: bound (a lower bound for suppression, an upper bound for IMD: the component is under the noise).
FIGURE_BITS = {
    "worst_sideband_suppression_db": 1,
    "carrier_suppression_db": 2,
    "worst_imd_db_pep": 4,
    **{f"imd{order}_worst_db_pep": 8 << i for i, order in enumerate(IMD_ORDERS)},
}


def bound_flags(result: Mapping[str, Any]) -> int:
    """Which key figures of a measurement's JSON are only bounds, as a bit mask (:data:`FIGURE_BITS`)."""
    flags = 0
    if result.get("worst_is_lower_bound"):
        flags |= FIGURE_BITS["worst_sideband_suppression_db"]
    if result.get("carrier_suppression_db") is not None and result.get("carrier_detected") is False:
        flags |= FIGURE_BITS["carrier_suppression_db"]
    if result.get("worst_imd_is_bound"):
        flags |= FIGURE_BITS["worst_imd_db_pep"]
    for row in result.get("imd") or ():
        key = f"imd{row.get('order')}_worst_db_pep" if isinstance(row, Mapping) else None
        if key in FIGURE_BITS and row.get("worst_is_bound"):
            flags |= FIGURE_BITS[key]
    return flags


@dataclass(frozen=True)
class SnapshotSummary:
    """A snapshot's line in a timeline: read from the store's columns only, fast for long lists.

    ``figures`` holds the key figures (:func:`key_figures`; None where the measurement gives
    none) and ``bounds`` the names of those that are only bounds.
    """

    id: int
    created_utc: str
    created_epoch: float
    rig: str
    measurement: str
    origin: str
    source: str
    device: str
    figures: dict[str, float | None]
    bounds: frozenset[str]
    tags: tuple[str, ...]
    note: str


def _number(value: Any) -> float | None:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        return None
    return float(value)


def generator_settings(signal: Any) -> dict[str, Any] | None:
    """The test signal as plain JSON: ``{"kind": "tone", "frequency_hz": 1000.0, ...}``."""
    if signal is None:
        return None
    if not dataclasses.is_dataclass(signal):
        return {"kind": type(signal).__name__.lower(), "description": repr(signal)}
    out = {"kind": type(signal).__name__.lower()}
    for f in dataclasses.fields(signal):
        out[f.name] = _plain(getattr(signal, f.name))
    return out


def _plain(value: Any) -> Any:
    if isinstance(value, (tuple, list)):
        return [_plain(v) for v in value]
    if isinstance(value, np.generic):
        return value.item()
    if dataclasses.is_dataclass(value):
        return {f.name: _plain(getattr(value, f.name)) for f in dataclasses.fields(value)}
    return value


def plan_from_settings(settings: Mapping[str, Any], iq: bool = False, channel: int | None = None) -> dict[str, Any]:
    """The frequency plan as given to the measurement (its settings) and the view of the capture."""
    tones = settings.get("tones") if settings.get("tones") is not None else settings.get("tone")
    return {
        "tones_hz": [float(t) for t in (tones or ())],
        "carrier_hz": None if settings.get("carrier") is None else float(settings["carrier"]),
        "wanted": settings.get("wanted") or "auto",
        "view": "iq" if iq else "real",
        "channel": None if iq else (channel or 1),
        "resolution_hz": None if settings.get("resolution") is None else float(settings["resolution"]),
    }


def make_snapshot(
    result: Mapping[str, Any],
    *,
    measurement: str,
    source: str,
    device: str,
    sample_rate_hz: float,
    plan: Mapping[str, Any],
    spectrum: "Spectrum | CompactSpectrum | None",
    origin: str = "analyze",
    generator: Mapping[str, Any] | None = None,
    setup: Mapping[str, Any] | None = None,
    clipped: bool | None = None,
    levels: Mapping[str, Any] | None = None,
    xruns: Mapping[str, int] | None = None,
    rig: str | None = None,
    note: str | None = None,
    tags: tuple[str, ...] | list[str] = (),
    calibration: tuple[str, ...] | None = None,
) -> Snapshot:
    """A snapshot taken now from a measurement's JSON and what it was measured on.

    Parameters
    ----------
    result : dict
        The measurement's ``to_json()``; kept as is.
    spectrum : Spectrum or CompactSpectrum or None
        The averaged spectrum the measurement read; compacted here (see
        :func:`rtanalyzer.store.spectrum.compact_spectrum`).
    calibration : tuple of str, optional
        Profiles in force; default: the names the result lists under ``"calibration"``.
    Other parameters are the :class:`Snapshot` fields of the same names.
    """
    created_utc, created_epoch = utc_now()
    if spectrum is not None and not isinstance(spectrum, CompactSpectrum):
        spectrum = compact_spectrum(spectrum)
    return Snapshot(
        measurement=measurement,
        result=dict(result),
        created_utc=created_utc,
        created_epoch=created_epoch,
        rig=rig or DEFAULT_RIG,
        origin=origin,
        source=source,
        device=device,
        sample_rate_hz=float(sample_rate_hz),
        plan=dict(plan),
        generator=None if generator is None else dict(generator),
        setup=dict(setup or {}),
        calibration=tuple(result.get("calibration") or () if calibration is None else calibration),
        spectrum=spectrum,
        clipped=bool(result.get("clipped", False) if clipped is None else clipped),
        levels=None if levels is None else dict(levels),
        xruns=dict(xruns or {}),
        note=note or "",
        tags=tuple(tags or ()),
    )
