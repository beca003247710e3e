"""`rtanalyzer live`: the live analyzer — sound card, file or simulated bench — in the terminal.

With no sound device present it runs on the simulated bench and says so in one line.
"""

from __future__ import annotations

import argparse
import json
import queue
import sys
import time

from rtanalyzer.cli.generate import KINDS, add_signal_options, build_signal
from rtanalyzer.cli.knob_options import add_knob_options, knob_changes
from rtanalyzer.errors import RtaError
from rtanalyzer.live.session import SOURCES



def add_parser(subparsers) -> None:
    p = subparsers.add_parser(
        "live",
        help="live analyzer: sound card, file or simulated bench",
        description="Drive the exciter with a test signal, capture its down-converted output and "
        "show the figures live. With no sound device present, runs on the simulated bench.",
    )
    p.add_argument("--headless", action="store_true", help="terminal readout (no window)")
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
    p.add_argument("--measure", choices=("sideband", "twotone"), default=None,
                   help="figure to show (default: twotone for a two-tone signal, else sideband)")
    p.add_argument("--update-hz", type=float, default=20.0, help="readouts per second (default 20)")
    p.add_argument("--average", type=int, default=1, help="spectra averaged per readout (default 1)")
    p.add_argument("--resolution", type=float, default=None, metavar="HZ",
                   help="analysis bin width, Hz (default: a window of about 85 ms)")
    p.add_argument("--seconds", type=float, default=None, help="stop after this long (default: until Ctrl-C)")
    p.add_argument("--jsonl", action="store_true", help="one JSON object per readout")
    add_knob_options(p)
    p.set_defaults(shows_cautions=True, func=run)


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
    if kind in ("tone", "quadrature") and args.freq is None and args.tone:
        args.freq = args.tone[0]
    return build_signal(args)


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
        averages=args.average, resolution_hz=args.resolution,
    )
    return config, notice


def run(args: argparse.Namespace) -> int:
    from rtanalyzer.cli.live_display import TerminalDisplay
    from rtanalyzer.live.session import build_engine

    if not args.headless:
        print("rtanalyzer: the desktop window is not available yet; showing the live readout here",
              file=sys.stderr)
    config, notice = config_from_args(args)
    if notice:
        print(f"rtanalyzer: {notice}", file=sys.stderr)
    engine = build_engine(config)
    source = engine.source
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
    return 0
