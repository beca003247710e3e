"""`rtanalyzer live`: the live analyzer — sound card, file or simulated bench — in a window.

The desktop window (rtanalyzer.gui) opens unless --headless or --jsonl is given; when PyQt6 or
vispy are missing, or no display can be opened, one line says so and the figures are shown in
the terminal instead. With no sound device present it runs on the simulated bench and says so.
"""

from __future__ import annotations

import argparse
import json
import queue
import sys
import time

from rtanalyzer.cli.generate import KINDS, add_signal_options, build_signal
from rtanalyzer.cli.history_options import add_save_options, check_save_options
from rtanalyzer.cli.knob_options import add_knob_options, knob_changes
from rtanalyzer.errors import RtaError
from rtanalyzer.live.session import SOURCES

# Signal options, for telling whether the command line described the signal (window settings).
_SIGNAL_DESTS = ("kind", "freq", "tones", "ratio_db", "band", "count", "spacing", "start", "stop", "steps",
                 "dwell", "settle", "amplitude_db", "phase_offset_deg")


def add_parser(subparsers) -> None:
    p = subparsers.add_parser(
        "live",
        help="live analyzer: sound card, file or simulated bench",
        description="Drive the exciter with a test signal, capture its down-converted output and "
        "show the figures live. With no sound device present, runs on the simulated bench.",
    )
    p.add_argument("--headless", action="store_true", help="terminal readout (no window)")
    p.add_argument("--screenshot", metavar="FILE.png",
                   help="window: save a picture of the whole window after --after seconds, then exit")
    p.add_argument("--after", type=float, default=2.0, metavar="SECONDS",
                   help="with --screenshot: how long the window runs first (default 2)")
    p.add_argument("--source", choices=SOURCES, default=None,
                   help="where the audio comes from (default: the sound card if there is one, else sim)")
    dev = p.add_argument_group("sound card")
    dev.add_argument("--input", metavar="DEV", help="input device: number or part of its name")
    dev.add_argument("--output", metavar="DEV", help="output device for the generator")
    dev.add_argument("--rate", type=int, default=48000, help="sample rate, Hz: 44100, 48000, 96000 or 192000")
    dev.add_argument("--input-channels", type=int, choices=(1, 2), default=None,
                     help="channels to record (default: 2 with --iq, else 1)")
    dev.add_argument("--block", type=int, default=1024, help="audio block, frames (default 1024)")
    p.add_argument("--file", metavar="F", help="with --source file: WAV/FLAC played at real-time pace")
    p.add_argument("--loop", action="store_true", help="with --source file: play it over and over")
    p.add_argument("--generate", choices=KINDS, dest="kind", default=None,
                   help="test signal driving the exciter (default tone; none for a file)")
    add_signal_options(p)
    plan = p.add_argument_group("frequency plan (as in analyze)")
    plan.add_argument("--tone", type=float, nargs="+", action="extend", metavar="HZ",
                      help="modulating tone(s), Hz, when no generator says so")
    plan.add_argument("--carrier", type=float, metavar="HZ", help="where the suppressed carrier lands, Hz")
    plan.add_argument("--wanted", choices=("above", "below", "auto"), default=None,
                      help="wanted sideband above or below the carrier (default auto)")
    view = plan.add_mutually_exclusive_group()
    view.add_argument("--channel", type=int, metavar="N", help="channel to analyse, 1 = left")
    view.add_argument("--iq", action="store_const", const=True, default=None, help="stereo I/Q input")
    p.add_argument("--measure", choices=_measurements(), default=None,
                   help="figure to show (default: twotone for a two-tone signal, else sideband; quadrature reads "
                   "a 90° network's outputs, left = I, right = Q)")
    p.add_argument("--calibration", action="extend", nargs="+", metavar="NAME", default=None,
                   help="calibration profile(s) taken out of every readout (calibration/NAME.cal, or a path)")
    p.add_argument("--trim-band", type=float, nargs=2, metavar=("LO", "HI"), default=None,
                   help="audio band whose worst point is the figure trimmed toward, Hz (default 300 3000)")
    p.add_argument("--update-hz", type=float, default=20.0, help="readouts per second (default 20)")
    p.add_argument("--average", type=int, default=1, help="spectra averaged per readout (default 1)")
    p.add_argument("--resolution", type=float, default=None, metavar="HZ",
                   help="analysis bin width, Hz (default: a window of about 85 ms)")
    p.add_argument("--seconds", type=float, default=None, help="stop after this long (default: until Ctrl-C)")
    p.add_argument("--jsonl", action="store_true", help="one JSON object per readout")
    add_knob_options(p)
    add_save_options(p, live=True)
    # The safety cautions come once per user: printed by the terminal readout, shown by the window.
    p.set_defaults(shows_cautions=False, func=run)


def _measurements() -> tuple[str, ...]:
    from rtanalyzer.measurements.registry import available

    return tuple(available())


def _signal(args: argparse.Namespace, default_kind: str | None):
    """The generator's signal: --generate, else what --tones/--tone imply, else the default."""
    if args.kind is None and default_kind is not None:
        if args.tones:
            default_kind = "twotone"
        elif args.tone and len(args.tone) > 1:
            from rtanalyzer.generator.signals import Multitone

            return Multitone(tuple(args.tone), args.level_dbfs)
    kind = args.kind or default_kind
    if kind is None:
        return None
    args.kind = kind
    from_tone = kind in ("tone", "quadrature") and args.freq is None and bool(args.tone)
    if from_tone:
        args.freq = args.tone[0]
    try:
        return build_signal(args)
    except RtaError as exc:
        if from_tone and str(exc).startswith("--freq"):  # the user typed --tone
            raise type(exc)("--tone" + str(exc)[len("--freq"):]) from None
        raise


def _trim_band(band) -> tuple[float, float] | None:
    if band is None:
        return None
    lo, hi = band
    if not (0 < lo < hi):
        raise RtaError(f"--trim-band {lo:g} {hi:g}: give two frequencies in Hz above 0, low below high")
    return float(lo), float(hi)


def config_from_args(args: argparse.Namespace):
    """The session the options describe, with its source resolved (and a notice if chosen)."""
    from rtanalyzer.live.session import SessionConfig, resolve_source
    from rtanalyzer.sources.bench.knobs import BenchKnobs

    if args.seconds is not None and not args.seconds > 0:
        raise RtaError(f"--seconds {args.seconds:g}: give a positive number of seconds")
    config, notice = resolve_source(SessionConfig(source=args.source))
    signal = _signal(args, None if config.source == "file" else "tone")
    measure = args.measure or ("twotone" if (args.kind == "twotone" or (signal is None and args.tones)) else "sideband")
    config = config.with_changes(
        signal=signal,
        knobs=BenchKnobs().with_changes(**knob_changes(args)),
        rate_hz=args.rate, block=args.block, input_device=args.input, output_device=args.output,
        input_channels=args.input_channels, file=args.file, loop=args.loop,
        tones_hz=tuple(args.tone or args.tones or ()), carrier_hz=args.carrier, wanted=args.wanted,
        channel=args.channel, iq=bool(args.iq), measurement=measure, update_hz=args.update_hz,
        averages=args.average, resolution_hz=args.resolution, calibration=tuple(args.calibration or ()),
        band_hz=_trim_band(args.trim_band),
    )
    return config, notice


def explicit_options(args: argparse.Namespace) -> frozenset[str]:
    """What the command line set (options left at their defaults do not count): the window
    restores everything else from its saved settings."""
    given = set()
    if args.source is not None:
        given.add("source")
    if args.input is not None or args.output is not None or args.input_channels is not None:
        given.add("devices")
    if args.rate != 48000:
        given.add("rate")
    if args.file is not None or args.loop:
        given.add("file")
    if any(getattr(args, d, None) is not None for d in _SIGNAL_DESTS) or args.tone or args.level_dbfs != -6.0:
        given.add("signal")
    if args.carrier is not None:
        given.add("plan.carrier")
    if args.wanted is not None:
        given.add("plan.wanted")
    if args.channel is not None or args.iq:
        given.add("plan.view")
    if args.tone or args.tones:
        given.add("plan.tones")
    if args.measure is not None:
        given.add("measurement")
    if args.average != 1:
        given.add("averages")
    if args.calibration:
        given.add("calibration")
    if args.trim_band:
        given.add("band")
    given.update(f"knobs.{name}" for name in knob_changes(args))
    return frozenset(given)


def _run_window(args: argparse.Namespace, config, notice: str | None) -> int | None:
    """Run the desktop window; None when it cannot open (after one line saying why)."""
    try:
        from rtanalyzer.gui.app import display_problem, run_window
    except (ImportError, OSError) as exc:
        why = f"PyQt6 and vispy are needed: {exc}; pip install 'rtanalyzer[gui]'"
    else:
        why = display_problem()
        if why is None:
            return run_window(config, notice=notice, explicit=explicit_options(args), screenshot=args.screenshot,
                              after=args.after, seconds=args.seconds)
    if args.screenshot:
        raise RtaError(f"--screenshot needs the desktop window, which cannot open here ({why})")
    print(f"rtanalyzer: no desktop window ({why}); showing the live readout here", file=sys.stderr)
    return None


def run(args: argparse.Namespace) -> int:
    from rtanalyzer.cli.cautions import show_first_run_notice
    from rtanalyzer.cli.live_display import TerminalDisplay
    from rtanalyzer.live.session import build_engine

    window = not (args.headless or args.jsonl)
    check_save_options(args)
    if window and (args.save or args.save_best):
        raise RtaError("--save and --save-best work with --headless (or --jsonl) until the window saves snapshots itself")
    if not window:
        show_first_run_notice(sys.stderr)  # stderr keeps --jsonl output clean
        if args.screenshot:
            raise RtaError("--screenshot needs the desktop window: leave out --headless and --jsonl")
    config, notice = config_from_args(args)
    if window:
        status = _run_window(args, config, notice)
        if status is not None:
            return status
        show_first_run_notice(sys.stderr)
    if notice:
        print(f"rtanalyzer: {notice}", file=sys.stderr)
    engine = build_engine(config)
    source = engine.source
    saver = None
    if args.save or args.save_best:
        from rtanalyzer.cli.history_options import LiveSaver

        saver = LiveSaver(args, engine, config)  # opens the store now: a bad store stops us before the run
    display = None if args.jsonl else TerminalDisplay(sys.stdout, source.describe(), engine.measurement.name)
    engine.start()
    started = time.monotonic()
    try:
        while args.seconds is None or time.monotonic() - started < args.seconds:
            try:
                readout = engine.readouts.get(timeout=1.0)
            except queue.Empty:
                if source.state == "finished":
                    break
                continue
            if saver is not None:
                saver.readout(readout)
            if args.jsonl:
                sys.stdout.write(json.dumps(readout.as_json(), allow_nan=False) + "\n")
                sys.stdout.flush()
            else:
                display.show(readout)
            if source.state == "finished" and engine.readouts.empty():
                break
    except KeyboardInterrupt:
        pass
    finally:
        engine.stop()
        if display is not None:
            display.close()
        if saver is not None:
            saver.finish(sys.stderr if args.jsonl else sys.stdout)
    return 0
