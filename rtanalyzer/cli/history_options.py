"""History options shared by `analyze`, `live` and `history`: where the store is, and saving snapshots.

A store file that is not an rtanalyzer history is never deleted: the command stops with one
line saying so, offering ``--reset-store`` (or, at a terminal, a y/N question) to move the
file aside as FILE.bak-<time> and start a new store.
"""

from __future__ import annotations

import argparse
import sys
import time
from typing import Any, TextIO

from rtanalyzer.errors import RtaError

#: Snapshots saved while trimming (--save-best) at most this often, seconds.
BEST_INTERVAL_S = 1.0


def add_store_options(parser: argparse.ArgumentParser) -> None:
    group = parser.add_argument_group("history store")
    group.add_argument("--store", metavar="FILE", default=None,
                       help="history store file (default: $RTANALYZER_STORE, else history.sqlite3 in the "
                            "user's data folder)")
    group.add_argument("--reset-store", action="store_true",
                       help="if the store file is not a usable history, move it aside to FILE.bak-<time> "
                            "and start a new one (nothing is deleted)")


def add_save_options(parser: argparse.ArgumentParser, live: bool = False) -> None:
    """--save (and --save-best for live), --note, --tag, --rig, --store, --reset-store."""
    group = parser.add_argument_group("saving to the history")
    if live:
        group.add_argument("--save", action="store_true", help="save the last readout as a snapshot when the run ends")
        group.add_argument("--save-best", action="store_true",
                           help="save a snapshot at each new best figure while trimming (at most one a second)")
    else:
        group.add_argument("--save", action="store_true", help="save the figures as a snapshot in the history")
    group.add_argument("--note", metavar="TEXT", default=None, help="note kept with the snapshot")
    group.add_argument("--tag", metavar="T", action="append", default=None, dest="save_tags",
                       help="tag the snapshot (repeat for several), e.g. --tag before")
    group.add_argument("--rig", metavar="R", default=None, help="rig or bench the snapshot belongs to (default 'default')")
    add_store_options(parser)


def check_save_options(args: argparse.Namespace) -> None:
    """--note, --tag and --rig only mean something with --save (or --save-best)."""
    saving = getattr(args, "save", False) or getattr(args, "save_best", False)
    given = [name for name, value in (("--note", args.note), ("--tag", args.save_tags), ("--rig", args.rig))
             if value is not None]
    if given and not saving:
        raise RtaError(f"{', '.join(given)} go{'es' if len(given) == 1 else ''} with --save: add --save to keep a snapshot")


def open_store(args: argparse.Namespace, create: bool = True, stdin: TextIO | None = None,
               stderr: TextIO | None = None):
    """Open the store the options name; an unusable file is moved aside only when asked to."""
    from rtanalyzer.store import SnapshotStore, StoreUnusable, back_up_unusable

    stdin = sys.stdin if stdin is None else stdin
    stderr = sys.stderr if stderr is None else stderr
    try:
        return SnapshotStore.open(args.store, create=create)
    except StoreUnusable as exc:
        if not getattr(args, "reset_store", False) and not _ask_reset(exc, stdin, stderr):
            raise StoreUnusable(
                exc.path, f"{exc.reason}. Nothing was changed; run again with --reset-store to move it "
                f"aside to {exc.path.name}.bak-<time> and start a new store"
            ) from None
        moved = back_up_unusable(exc.path)
        print(f"rtanalyzer: moved the unusable store {exc.path} aside to {moved}; starting a new store",
              file=stderr)
        return SnapshotStore.open(exc.path, create=True)


def _ask_reset(exc, stdin: TextIO, stderr: TextIO) -> bool:
    """At a terminal, offer to move the file aside; elsewhere (scripts, CI) never ask."""
    try:
        interactive = stdin.isatty()
    except (AttributeError, ValueError):
        interactive = False
    if not interactive:
        return False
    stderr.write(f"rtanalyzer: {exc}\nmove it aside to {exc.path.name}.bak-<time> and start a new store? [y/N] ")
    stderr.flush()
    answer = stdin.readline()
    return answer.strip().lower() in ("y", "yes")


def saved_line(snapshot_id: int) -> str:
    return f"saved snapshot #{snapshot_id}"


# -- analyze --save ---------------------------------------------------------------------------------


def save_analysis(args: argparse.Namespace, plugin, capture, signal, settings: dict[str, Any], figures) -> int:
    """Store an offline analysis (figures, plan, file, spectrum) and say so in one line.

    ``figures`` is the JSON the command printed (after any calibration), or a result object;
    the calibration profiles in force are the names it lists under ``"calibration"``.
    """
    from rtanalyzer.measurements.base import settings_with_defaults
    from rtanalyzer.measurements.component import spectrum_of
    from rtanalyzer.store import make_snapshot, plan_from_settings

    resolution = settings_with_defaults(plugin, settings).get("resolution") or 1.0
    # The spectrum the plugin read: same signal, same resolution, same function.
    spectrum = spectrum_of(signal, resolution)
    data = figures.to_json() if hasattr(figures, "to_json") else dict(figures)
    snapshot = make_snapshot(
        data,
        measurement=plugin.name,
        source="file",
        device=str(args.file),
        sample_rate_hz=signal.rate_hz,
        plan=plan_from_settings(settings, iq=bool(getattr(args, "iq", False)), channel=getattr(args, "channel", None)),
        spectrum=spectrum,
        origin="analyze",
        setup={"file": str(args.file), "format": capture.sample_format, "seconds": round(signal.seconds, 6),
               "channels": capture.channels, "view": signal.label},
        clipped=signal.clipped,
        rig=args.rig,
        note=args.note,
        tags=args.save_tags or (),
    )
    with open_store(args) as store:
        snapshot_id = store.add(snapshot)
    print(saved_line(snapshot_id), file=sys.stderr if args.json else sys.stdout)
    return snapshot_id


# -- live --save / --save-best ---------------------------------------------------------------------


class LiveSaver:
    """Keeps the last readout (for --save) and saves new bests while trimming (--save-best).

    Bests are saved at most once per :data:`BEST_INTERVAL_S`; a best reached sooner is held and
    saved when the interval has passed, or when the run ends, so the best of the run is never
    lost. A best that beats the last saved one by no more than the live readout's steady band
    (``live.best.STEADY_DB``, readout noise rather than a trim) is not saved again. Nothing is printed during the run (the terminal readout redraws in place):
    :meth:`finish` says what was saved.
    """

    def __init__(self, args: argparse.Namespace, engine, config) -> None:
        from rtanalyzer.live.best import FIGURES, STEADY_DB

        self.args = args
        self.engine = engine
        self.config = config
        self.store = open_store(args) if (args.save or args.save_best) else None
        self.measurement = engine.measurement.name
        figure = FIGURES.get(self.measurement)
        self.key, self.larger_is_better = (figure[0], figure[1]) if figure else (None, True)
        self.last = None
        self.best_value: float | None = None
        self.pending = None
        self.last_saved_at = -float("inf")
        self.saved_best: list[int] = []
        self.saved_value: float | None = None
        self.min_gain_db = STEADY_DB

    def _snapshot(self, readout, origin: str):
        from rtanalyzer.store import generator_settings, make_snapshot, plan_from_settings

        settings = dict(self.engine.settings)
        result = readout.result
        # The tones actually analysed (the engine follows the generator, e.g. a sweep's step).
        if result.get("measurement") == "sideband" and result.get("points"):
            settings["tone"] = [p["tone_hz"] for p in result["points"]]
        setup: dict[str, Any] = {"update_hz": self.engine.update_hz, "nfft": self.engine.nfft,
                                 "averages": self.engine.spectrum.averages}
        if self.config.source == "sim":
            from dataclasses import asdict

            setup["bench"] = asdict(self.config.knobs)
        if self.config.source == "file":
            setup["file"] = self.config.file
        if readout.sweep is not None:
            setup["sweep"] = readout.sweep
        return make_snapshot(
            result,
            measurement=self.engine.measurement.name,
            source=self.config.source,
            device=self.engine.source.describe(),
            sample_rate_hz=self.engine.source.rate_hz,
            plan=plan_from_settings(settings, iq=self.engine.iq, channel=None if self.engine.iq else self.engine.channel),
            spectrum=readout.spectrum,
            origin=origin,
            generator=generator_settings(self.config.signal),
            setup=setup,
            levels=readout.levels,
            xruns=readout.xruns,
            rig=self.args.rig,
            note=self.args.note,
            tags=self.args.save_tags or (),
        )

    def readout(self, readout) -> None:
        if readout.result is None:
            return
        self.last = readout
        if not self.args.save_best or self.key is None:
            return
        from rtanalyzer.live.best import figure_value

        value = figure_value(self.measurement, readout.result)
        if value is not None and (self.best_value is None or
                                  (value > self.best_value if self.larger_is_better else value < self.best_value)):
            self.best_value = value
            gain = None if self.saved_value is None else (value - self.saved_value) * (1 if self.larger_is_better else -1)
            if gain is None or gain > self.min_gain_db:
                self.pending = self._snapshot(readout, "live-best")  # compacted now: later readouts move on
                self.pending_value = value
        now = time.monotonic()
        if self.pending is not None and now - self.last_saved_at >= BEST_INTERVAL_S:
            self._save_pending(now)

    def _save_pending(self, now: float) -> None:
        self.saved_best.append(self.store.add(self.pending))
        self.saved_value = self.pending_value
        self.pending = None
        self.last_saved_at = now

    def finish(self, stream: TextIO) -> None:
        """Save what is still held and the last readout (--save); print what was saved."""
        if self.store is None:
            return
        try:
            if self.pending is not None:
                self._save_pending(time.monotonic())
            if self.saved_best:
                ids = " ".join(f"#{i}" for i in self.saved_best)
                print(f"saved {len(self.saved_best)} best-so-far snapshot{'s' if len(self.saved_best) != 1 else ''}: {ids}",
                      file=stream)
            if self.args.save:
                if self.last is None:
                    raise RtaError("no readout with figures to save (the run ended before the first one)")
                print(saved_line(self.store.add(self._snapshot(self.last, "live-end"))), file=stream)
        finally:
            self.store.close()
