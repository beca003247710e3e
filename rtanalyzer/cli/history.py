"""`rtanalyzer history ...`: the timeline of saved snapshots, before/after comparisons, export and reports.

Snapshots are saved by ``analyze ... --save`` and ``live --headless --save/--save-best``; this
command lists, shows, annotates, deletes, compares, exports, imports and reports them.
"""

from __future__ import annotations

import argparse
import re
import sys
import time
from datetime import datetime
from pathlib import Path
from typing import Any

from rtanalyzer.cli.output import print_json
from rtanalyzer.cli.history_options import add_store_options, open_store
from rtanalyzer.errors import RtaError

_RELATIVE = re.compile(r"^(\d+(?:\.\d+)?)\s*([smhdw])$")
_UNITS = {"s": 1, "m": 60, "h": 3600, "d": 86400, "w": 7 * 86400}
NOTE_WIDTH = 32
# How a snapshot was taken, in the list's "from" column.
TAKEN = {"analyze": "file", "live-end": "live", "live-best": "best"}


def parse_when(text: str, option: str = "--since", now: float | None = None) -> float:
    """Epoch seconds from a date/time (local unless it names a zone) or an age like 6h, 2d.

    Examples
    --------
    >>> parse_when("2025-01-02T18:00:00Z")
    1735840800.0
    >>> parse_when("90m", now=10000.0)
    4600.0
    """
    raw = text.strip()
    m = _RELATIVE.match(raw)
    if m:
        return (time.time() if now is None else now) - float(m.group(1)) * _UNITS[m.group(2)]
    try:
        when = datetime.fromisoformat(raw.replace("Z", "+00:00") if raw.endswith("Z") else raw)
    except ValueError:
        raise RtaError(
            f"{option} {text!r} is not a date: give e.g. 2025-01-02, '2025-01-02 19:30', 2025-01-02T18:30Z, "
            "or an age such as 90m, 6h, 2d"
        ) from None
    if when.tzinfo is None:
        when = when.astimezone()  # local time of this machine
    return when.timestamp()


def _add_filters(p: argparse.ArgumentParser) -> None:
    g = p.add_argument_group("selection")
    g.add_argument("--rig", metavar="R", help="only this rig")
    g.add_argument("--tag", metavar="T", action="append", dest="tags", help="only snapshots with this tag (repeat: all of them)")
    g.add_argument("--since", metavar="DATE", help="taken at or after DATE (local time, or ...Z for UTC, or an age: 6h, 2d)")
    g.add_argument("--until", metavar="DATE", help="taken before DATE")
    g.add_argument("--measurement", metavar="M", help="only this measurement (sideband, twotone, ...)")
    g.add_argument("--id", metavar="N", action="append", dest="ids", help="only these snapshots (repeat)")


def _filters(args: argparse.Namespace) -> dict[str, Any]:
    from rtanalyzer.store import parse_id

    return {
        "rig": args.rig,
        "tags": args.tags,
        "since": None if args.since is None else parse_when(args.since, "--since"),
        "until": None if args.until is None else parse_when(args.until, "--until"),
        "measurement": args.measurement,
        "ids": None if args.ids is None else [parse_id(i) for i in args.ids],
    }


def _selection_text(args: argparse.Namespace) -> str:
    parts = []
    for name in ("rig", "measurement", "since", "until"):
        if getattr(args, name, None) is not None:
            parts.append(f"{name} {getattr(args, name)}")
    parts += [f"tag {t}" for t in args.tags or ()]
    parts += [f"#{i.lstrip('#')}" for i in getattr(args, "ids", None) or ()]
    return ", ".join(parts) or "all snapshots"


def add_parser(subparsers) -> None:
    p = subparsers.add_parser(
        "history",
        help="saved snapshots: list, show, compare before/after, export, report",
        description="The history of adjustments: snapshots saved with `analyze ... --save` or "
        "`live --headless --save`, compared before/after, exported and reported.",
    )
    sub = p.add_subparsers(dest="history_command", metavar="ACTION", parser_class=type(p))
    sub.required = True

    q = sub.add_parser("list", help="the timeline of snapshots, oldest first")
    _add_filters(q)
    q.add_argument("--last", type=int, metavar="N", help="only the newest N")
    q.add_argument("--json", action="store_true", help="one JSON array")
    add_store_options(q)
    q.set_defaults(func=_list)

    q = sub.add_parser("show", help="everything about one snapshot")
    q.add_argument("id", metavar="ID")
    q.add_argument("--json", action="store_true", help="one JSON object")
    add_store_options(q)
    q.set_defaults(func=_show)

    q = sub.add_parser("note", help="set (replace) the note of a snapshot")
    q.add_argument("id", metavar="ID")
    q.add_argument("text", metavar="TEXT", help="the new note ('' clears it)")
    add_store_options(q)
    q.set_defaults(func=_note)

    q = sub.add_parser("tag", help="add a tag to a snapshot (or remove it with --remove)")
    q.add_argument("id", metavar="ID")
    q.add_argument("tag", metavar="TAG")
    q.add_argument("--remove", action="store_true", help="remove the tag instead")
    add_store_options(q)
    q.set_defaults(func=_tag)

    q = sub.add_parser("delete", help="delete a snapshot (asks first)")
    q.add_argument("id", metavar="ID")
    q.add_argument("--yes", action="store_true", help="do not ask")
    add_store_options(q)
    q.set_defaults(func=_delete)

    q = sub.add_parser("compare", help="before/after: the change in every figure from A to B",
                       description="A and B are snapshot ids (12 or #12) or tag:NAME for a group, whose "
                       "figures are averaged in dB.")
    q.add_argument("a", metavar="A")
    q.add_argument("b", metavar="B")
    q.add_argument("--json", action="store_true", help="one JSON object")
    add_store_options(q)
    q.set_defaults(func=_compare)

    q = sub.add_parser("export", help="write snapshots (with spectra, tags, notes) to a CSV or JSON file")
    _add_filters(q)
    q.add_argument("--format", choices=("csv", "json"), default=None, help="default: from the --out suffix")
    q.add_argument("--out", required=True, metavar="FILE")
    add_store_options(q)
    q.set_defaults(func=_export)

    q = sub.add_parser("import", help="add the snapshots of an exported file (already present ones are skipped)")
    q.add_argument("file", metavar="FILE")
    add_store_options(q)
    q.set_defaults(func=_import)

    q = sub.add_parser("report", help="a self-contained HTML report (figures, plots, notes, set-up, cautions)")
    _add_filters(q)
    q.add_argument("--compare", nargs=2, metavar=("A", "B"), help="a before/after report of A and B")
    q.add_argument("--out", required=True, metavar="FILE.html")
    add_store_options(q)
    q.set_defaults(func=_report)


# -- text helpers ---------------------------------------------------------------------------------


def local_time(epoch: float, seconds: bool = False) -> str:
    return datetime.fromtimestamp(epoch).strftime("%Y-%m-%d %H:%M:%S" if seconds else "%Y-%m-%d %H:%M")


def figures_text(figures: dict[str, Any], bounds: frozenset[str] | set[str], measurement: str) -> str:
    """Key figures with units; a bound is marked (≥ at least, < under the noise).

    Examples
    --------
    >>> figures_text({"worst_sideband_suppression_db": 60.1, "carrier_suppression_db": 46.2},
    ...              {"worst_sideband_suppression_db"}, "sideband")
    'sideband ≥60.1 dB  carrier 46.2 dBc'
    """

    def value(key: str, unit: str = "", mark: str = "") -> str | None:
        v = figures.get(key)
        if v is None:
            return None
        return f"{mark if key in bounds else ''}{v:.1f}{unit}"

    if measurement == "sideband":
        worst = value("worst_sideband_suppression_db", " dB", "≥")
        carrier = value("carrier_suppression_db", " dBc", "≥")
        parts = ([f"sideband {worst}"] if worst else []) + ([f"carrier {carrier}"] if carrier else [])
        return "  ".join(parts) or "—"
    if measurement == "twotone":
        parts = []
        for order in (3, 5, 7, 9):
            text = value(f"imd{order}_worst_db_pep", "", "<")
            if text:
                parts.append(f"IMD{order} {text}")
        return ("  ".join(parts) + " dB PEP") if parts else "—"
    return "—"


def _short(text: str, width: int) -> str:
    one = " ".join(text.split())
    return one if len(one) <= width else one[: width - 1] + "…"


def _table(rows: list[tuple[str, ...]], head: tuple[str, ...], right: tuple[int, ...] = (0,)) -> list[str]:
    widths = [max(len(r[i]) for r in [head, *rows]) for i in range(len(head))]
    out = []
    for r in [head, *rows]:
        cells = [c.rjust(widths[i]) if i in right else c.ljust(widths[i]) for i, c in enumerate(r)]
        out.append("  ".join(cells).rstrip())
    return out


def _describe(s) -> str:
    tags = f", tags {', '.join(s.tags)}" if s.tags else ""
    return f"{local_time(s.created_epoch)}, rig {s.rig}, {s.measurement}{tags}"


# -- actions ------------------------------------------------------------------------------------------


def _open_existing(args: argparse.Namespace):
    return open_store(args, create=False)


def _list(args: argparse.Namespace) -> int:
    from rtanalyzer.store import default_store_path

    filters = _filters(args)
    path = Path(args.store).expanduser() if args.store else default_store_path()
    if not path.exists():
        if args.json:
            print("[]")
        else:
            print(f"no snapshots yet: the store {path} does not exist (save one with analyze ... --save)")
        return 0
    with _open_existing(args) as store:
        if args.last is not None:
            if args.last < 1:
                raise RtaError(f"--last {args.last}: give a positive number of snapshots")
            snaps = list(reversed(store.summaries(**filters, limit=args.last, newest_first=True)))
        else:
            snaps = store.summaries(**filters)
    if args.json:
        rows = [
            {"id": s.id, "created_utc": s.created_utc, "created_epoch": s.created_epoch, "rig": s.rig,
             "measurement": s.measurement, "origin": s.origin, "source": s.source, "device": s.device,
             **s.figures, "bounds": sorted(s.bounds), "tags": list(s.tags), "note": s.note}
            for s in snaps
        ]
        print_json(rows)
        return 0
    if not snaps:
        print(f"no snapshots match ({_selection_text(args)}) in {path}")
        return 0
    rows = [
        (f"#{s.id}", local_time(s.created_epoch), s.rig, s.measurement, TAKEN.get(s.origin, s.origin),
         figures_text(s.figures, s.bounds, s.measurement),
         ", ".join(s.tags), _short(s.note, NOTE_WIDTH))
        for s in snaps
    ]
    for line in _table(rows, ("id", "time", "rig", "measurement", "from", "figures", "tags", "note")):
        print(line)
    print(f"{len(snaps)} snapshot{'s' if len(snaps) != 1 else ''} · {path}")
    return 0


def _show(args: argparse.Namespace) -> int:
    from rtanalyzer.cli.text import render
    from rtanalyzer.store import parse_id
    from rtanalyzer.store.exchange import snapshot_to_json

    with _open_existing(args) as store:
        s = store.get(parse_id(args.id))
    if args.json:
        data = snapshot_to_json(s)
        if s.spectrum is not None:
            data["spectrum"] = s.spectrum.header()  # the levels: history export
        print_json(data)
        return 0
    lines = [
        f"snapshot #{s.id} · {s.measurement} · rig {s.rig} · {local_time(s.created_epoch, True)} "
        f"(UTC {s.created_utc}) · {s.origin}",
        f"tags      {', '.join(s.tags) or '—'}",
        f"note      {s.note or '—'}",
        f"source    {s.source}: {s.device} · {s.sample_rate_hz:g} Hz",
        f"plan      {_plan_text(s.plan)}",
        f"generator {_generator_text(s.generator)}",
        f"set-up    {', '.join(f'{k} {v}' for k, v in s.setup.items() if k != 'bench') or '—'}",
        f"calibration in force: {', '.join(s.calibration) or 'none'}",
    ]
    if s.xruns:
        lines.append("xruns     " + ", ".join(f"{k.replace('_', ' ')} {v}" for k, v in s.xruns.items()))
    if s.levels and isinstance(s.levels.get("peak_dbfs"), list):
        lines.append("levels    " + "  ".join(
            f"ch{i + 1} peak {p} dBFS rms {r} dBFS" for i, (p, r) in enumerate(zip(s.levels["peak_dbfs"], s.levels["rms_dbfs"]))))
    if s.spectrum is not None:
        sp = s.spectrum
        lines.append(
            f"spectrum  {sp.levels_db.size} points {sp.start_hz:.1f}..{sp.stop_hz:.1f} Hz, each the largest of "
            f"{sp.pooled} bins of {sp.bin_hz:.3g} Hz; analysis bandwidth {sp.enbw_hz:.3g} Hz"
        )
    print("\n".join(lines))
    print(render(s.measurement, s.result, "figures"))
    return 0


def _plan_text(plan: dict[str, Any]) -> str:
    tones = ", ".join(f"{t:g}" for t in plan.get("tones_hz") or ()) or "—"
    carrier = "found from the capture" if plan.get("carrier_hz") is None else f"{plan['carrier_hz']:g} Hz"
    view = "I/Q" if plan.get("view") == "iq" else f"channel {plan.get('channel') or 1}"
    return f"tones {tones} Hz · carrier {carrier} · wanted {plan.get('wanted', 'auto')} · {view}"


def _generator_text(generator: dict[str, Any] | None) -> str:
    if not generator:
        return "—"
    return ", ".join(f"{k} {v}" for k, v in generator.items())


def _note(args: argparse.Namespace) -> int:
    from rtanalyzer.store import parse_id

    with _open_existing(args) as store:
        n = parse_id(args.id)
        store.set_note(n, args.text)
    print(f"note of #{n} {'cleared' if not args.text else 'set'}")
    return 0


def _tag(args: argparse.Namespace) -> int:
    from rtanalyzer.store import parse_id

    with _open_existing(args) as store:
        n = parse_id(args.id)
        if args.remove:
            done = store.remove_tag(n, args.tag)
            print(f"removed tag {args.tag!r} from #{n}" if done else f"#{n} had no tag {args.tag!r}")
        else:
            done = store.add_tag(n, args.tag)
            print(f"tagged #{n} {args.tag!r}" if done else f"#{n} already has the tag {args.tag!r}")
    return 0


def _delete(args: argparse.Namespace) -> int:
    from rtanalyzer.store import parse_id

    with _open_existing(args) as store:
        n = parse_id(args.id)
        s = store.get(n, with_spectrum=False)
        if not args.yes:
            sys.stderr.write(f"delete snapshot #{n} ({_describe(s)})? [y/N] ")
            sys.stderr.flush()
            try:
                answer = sys.stdin.readline() if sys.stdin is not None else ""
            except (OSError, ValueError):
                answer = ""
            if not answer:
                print(f"\nrtanalyzer: no answer on standard input: snapshot #{n} kept (use --yes to delete without asking)",
                      file=sys.stderr)
                return 1
            if answer.strip().lower() not in ("y", "yes"):
                print(f"kept snapshot #{n}")
                return 0
        store.delete(n)
    print(f"deleted snapshot #{n}")
    return 0


def _compare(args: argparse.Namespace) -> int:
    from rtanalyzer.store import compare, render_comparison

    with _open_existing(args) as store:
        a, b = store.select(args.a, with_spectra=False), store.select(args.b, with_spectra=False)
    result = compare(a, b, _selector(args.a), _selector(args.b))
    if args.json:
        print_json(result.to_json())
    else:
        print(render_comparison(result))
    return 0


def _selector(text: str) -> str:
    text = text.strip()
    return text if text.startswith("tag:") else f"#{text.lstrip('#')}"


def _export(args: argparse.Namespace) -> int:
    from rtanalyzer.store.exchange import export_snapshots

    fmt = args.format or {".csv": "csv", ".json": "json"}.get(Path(args.out).suffix.lower())
    if fmt is None:
        raise RtaError(f"--out {args.out}: say --format csv or --format json (or name the file .csv or .json)")
    with _open_existing(args) as store:
        snaps = store.list(**_filters(args), with_spectra=True)
    n = export_snapshots(snaps, args.out, fmt)
    print(f"exported {n} snapshot{'s' if n != 1 else ''} to {args.out} ({fmt})")
    return 0


def _import(args: argparse.Namespace) -> int:
    from rtanalyzer.store.exchange import read_export

    snaps = read_export(args.file)
    with open_store(args) as store:
        ids = store.add_many(snaps, keep_ids=True)
    added = [i for i in ids if i is not None]
    skipped = len(ids) - len(added)
    text = f"imported {len(added)} snapshot{'s' if len(added) != 1 else ''} from {args.file}"
    if added:
        text += f" (#{min(added)}..#{max(added)})" if len(added) > 1 else f" (#{added[0]})"
    if skipped:
        text += f"; skipped {skipped} already in the store"
    print(text)
    return 0


def _report(args: argparse.Namespace) -> int:
    from rtanalyzer.cli.cautions import CAUTIONS
    from rtanalyzer.store import compare
    from rtanalyzer.store.report import render_report

    out = Path(args.out)
    with _open_existing(args) as store:
        comparison = None
        if args.compare and _selection_text(args) != "all snapshots":
            raise RtaError("--compare A B chooses the snapshots itself: leave out --rig, --tag, --since, --until, "
                           "--measurement and --id")
        if args.compare:
            a, b = store.select(args.compare[0]), store.select(args.compare[1])
            c = compare(a, b, _selector(args.compare[0]), _selector(args.compare[1]))
            comparison = (c, a, b)
            seen, snaps = set(), []
            for s in sorted([*a, *b], key=lambda s: (s.created_epoch, s.id)):
                if s.id not in seen:
                    seen.add(s.id)
                    snaps.append(s)
            selection = f"compare {_selector(args.compare[0])} with {_selector(args.compare[1])}"
        else:
            snaps = store.list(**_filters(args), with_spectra=True)
            selection = _selection_text(args)
            if not snaps:
                raise RtaError(f"no snapshots match ({selection}): nothing to report")
        html = render_report(snaps, CAUTIONS, comparison, selection, str(store.path))
    try:
        tmp = out.with_name(out.name + ".part")
        tmp.write_text(html, encoding="utf-8")
        tmp.replace(out)
    except OSError as exc:
        raise RtaError(f"cannot write {out}: {exc.strerror or exc}") from None
    print(f"wrote {out} ({len(snaps)} snapshot{'s' if len(snaps) != 1 else ''}, {len(html) // 1024} KiB)")
    return 0
