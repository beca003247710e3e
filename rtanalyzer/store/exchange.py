"""Export snapshots to a file and import them back with nothing lost.

Two formats, both one self-contained file:

- **JSON**: ``{"format": "rtanalyzer-history", "version": 1, "snapshots": [...]}``, each snapshot
  with every field; the spectrum's float32 levels as base64 of their little-endian bytes
  (exact, and a quarter of the size of decimal text).
- **CSV**: one row per snapshot. The first columns are what a spreadsheet user wants to see
  (id, time, rig, measurement, key figures, tags, note); the nested parts (plan, generator,
  set-up, result, levels, xruns, calibration) follow as JSON text, and the spectrum as its
  header in JSON plus the base64 levels. One file rather than a folder of files, so an
  evening's history can be mailed or attached to a forum post as it is; the key figure
  columns are for reading only and are recomputed from the result on import.

Floats are written with Python's shortest round-trip repr, so every value reads back equal.
"""

from __future__ import annotations

import base64
import csv
import io
import json
from pathlib import Path
from typing import Any, Iterable

from rtanalyzer.store.errors import StoreError
from rtanalyzer.store.snapshot import NUMBER_FIELDS, TEXT_FIELDS, Snapshot, key_figures
from rtanalyzer.store.spectrum import CompactSpectrum

FORMAT_NAME = "rtanalyzer-history"
FORMAT_VERSION = 1
FORMATS = ("json", "csv")
_FIGURE_COLUMNS = tuple(key_figures({}))
CSV_COLUMNS = (
    "id", "created_utc", "created_epoch", "rig", "measurement", *_FIGURE_COLUMNS, "tags", "note",
    "origin", "source", "device", "sample_rate_hz", "clipped", "uid",
    "plan_json", "generator_json", "setup_json", "calibration_json", "levels_json", "xruns_json", "result_json",
    "spectrum_json", "spectrum_levels_b64",
)


def snapshot_to_json(s: Snapshot) -> dict[str, Any]:
    """Every field of a snapshot as plain JSON (spectrum levels in base64 float32 LE)."""
    return {
        "id": s.id,
        **{f: getattr(s, f) for f in (*TEXT_FIELDS, *NUMBER_FIELDS)},
        "plan": s.plan,
        "generator": s.generator,
        "setup": s.setup,
        "calibration": list(s.calibration),
        "result": s.result,
        "clipped": s.clipped,
        "levels": s.levels,
        "xruns": s.xruns,
        "note": s.note,
        "tags": list(s.tags),
        "spectrum": None if s.spectrum is None else _spectrum_json(s.spectrum),
    }


def _spectrum_json(sp: CompactSpectrum) -> dict[str, Any]:
    return {**_spectrum_header(sp), "levels_db_f32le_b64": base64.b64encode(sp.to_bytes()).decode("ascii")}


def _spectrum_header(sp: CompactSpectrum) -> dict[str, Any]:
    return {k: v for k, v in sp.header().items() if k not in ("stop_hz", "points")}


def _spectrum_from(header: dict[str, Any], levels_b64: str) -> CompactSpectrum:
    levels = CompactSpectrum.levels_from_bytes(base64.b64decode(levels_b64, validate=True))
    return CompactSpectrum(levels, float(header["start_hz"]), float(header["step_hz"]), float(header["bin_hz"]),
                           float(header["enbw_hz"]), bool(header["is_complex"]), int(header["pooled"]))


def snapshot_from_json(d: dict[str, Any]) -> Snapshot:
    spectrum = d.get("spectrum")
    return Snapshot(
        **{f: d[f] for f in TEXT_FIELDS},
        **{f: float(d[f]) for f in NUMBER_FIELDS},
        result=d["result"],
        plan=d["plan"],
        generator=d.get("generator"),
        setup=d.get("setup") or {},
        calibration=tuple(d.get("calibration") or ()),
        spectrum=None if spectrum is None else _spectrum_from(spectrum, spectrum["levels_db_f32le_b64"]),
        clipped=bool(d["clipped"]),
        levels=d.get("levels"),
        xruns=d.get("xruns") or {},
        note=d.get("note") or "",
        tags=tuple(d.get("tags") or ()),
        id=None if d.get("id") is None else int(d["id"]),
    )


def export_snapshots(snapshots: Iterable[Snapshot], path: str | Path, fmt: str) -> int:
    """Write the snapshots (with their spectra) to ``path`` as ``fmt`` ("json" or "csv"); return how many."""
    if fmt not in FORMATS:
        raise StoreError(f"--format {fmt!r}: choose one of {', '.join(FORMATS)}")
    snapshots = list(snapshots)
    if fmt == "json":
        doc = {"format": FORMAT_NAME, "version": FORMAT_VERSION, "snapshots": [snapshot_to_json(s) for s in snapshots]}
        text = json.dumps(doc, allow_nan=False, indent=1) + "\n"
    else:
        text = _csv_text(snapshots)
    _write_text(Path(path), text)
    return len(snapshots)


def _csv_text(snapshots: list[Snapshot]) -> str:
    buffer = io.StringIO()
    writer = csv.DictWriter(buffer, fieldnames=CSV_COLUMNS, lineterminator="\n")
    writer.writeheader()
    for s in snapshots:
        d = snapshot_to_json(s)
        figures = key_figures(s.result)
        row = {
            **{k: d[k] for k in ("id", "note", *TEXT_FIELDS)},
            **{k: repr(d[k]) for k in NUMBER_FIELDS},
            **{k: "" if v is None else repr(v) for k, v in figures.items()},
            "tags": json.dumps(list(s.tags)),
            "clipped": "1" if s.clipped else "0",
            "plan_json": json.dumps(s.plan, allow_nan=False),
            "generator_json": json.dumps(s.generator, allow_nan=False),
            "setup_json": json.dumps(s.setup, allow_nan=False),
            "calibration_json": json.dumps(list(s.calibration)),
            "levels_json": json.dumps(s.levels, allow_nan=False),
            "xruns_json": json.dumps(s.xruns, allow_nan=False),
            "result_json": json.dumps(s.result, allow_nan=False),
            "spectrum_json": "" if s.spectrum is None else json.dumps(_spectrum_header(s.spectrum)),
            "spectrum_levels_b64": "" if s.spectrum is None else base64.b64encode(s.spectrum.to_bytes()).decode("ascii"),
        }
        if row["id"] is None:
            row["id"] = ""
        writer.writerow(row)
    return buffer.getvalue()


def _write_text(path: Path, text: str) -> None:
    tmp = path.with_name(path.name + ".part")
    try:
        tmp.write_text(text, encoding="utf-8", newline="")
        tmp.replace(path)
    except OSError as exc:
        raise StoreError(f"cannot write {path}: {exc.strerror or exc}") from None


def read_export(path: str | Path) -> list[Snapshot]:
    """Snapshots from a file written by :func:`export_snapshots` (JSON or CSV, told by content)."""
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise StoreError(f"{path}: no such file") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise StoreError(f"cannot read {path}: {getattr(exc, 'strerror', None) or exc}") from None
    try:
        if text.lstrip().startswith("{"):
            return _from_json_text(path, text)
        return _from_csv_text(path, text)
    except StoreError:
        raise
    except (KeyError, TypeError, ValueError, json.JSONDecodeError) as exc:
        raise StoreError(f"{path} is not a readable rtanalyzer history export ({type(exc).__name__}: {exc})") from None


def _from_json_text(path: Path, text: str) -> list[Snapshot]:
    doc = json.loads(text)
    if not isinstance(doc, dict) or doc.get("format") != FORMAT_NAME:
        raise StoreError(f"{path} is JSON but not an rtanalyzer history export (no \"format\": \"{FORMAT_NAME}\")")
    if doc.get("version") != FORMAT_VERSION:
        raise StoreError(f"{path} is export version {doc.get('version')!r}; this rtanalyzer reads version {FORMAT_VERSION}")
    return [snapshot_from_json(d) for d in doc["snapshots"]]


def _from_csv_text(path: Path, text: str) -> list[Snapshot]:
    csv.field_size_limit(max(csv.field_size_limit(), 16 * 1024 * 1024))
    reader = csv.DictReader(io.StringIO(text, newline=""))
    if reader.fieldnames is None or not {"uid", "result_json", "spectrum_levels_b64"} <= set(reader.fieldnames):
        raise StoreError(f"{path} is not an rtanalyzer history export (JSON, or CSV with the exported columns)")
    out = []
    for row in reader:
        spectrum = None
        if row["spectrum_json"]:
            spectrum = _spectrum_from(json.loads(row["spectrum_json"]), row["spectrum_levels_b64"])
        out.append(
            Snapshot(
                **{f: row[f] for f in TEXT_FIELDS},
                **{f: float(row[f]) for f in NUMBER_FIELDS},
                result=json.loads(row["result_json"]),
                plan=json.loads(row["plan_json"]),
                generator=json.loads(row["generator_json"]),
                setup=json.loads(row["setup_json"]),
                calibration=tuple(json.loads(row["calibration_json"])),
                spectrum=spectrum,
                clipped=row["clipped"] == "1",
                levels=json.loads(row["levels_json"]),
                xruns=json.loads(row["xruns_json"]),
                note=row["note"],
                tags=tuple(json.loads(row["tags"])),
                id=int(row["id"]) if row["id"] else None,
            )
        )
    return out
