"""`rtanalyzer live`: the live analyzer — sound card, file or simulated bench — in the terminal.

With no sound device present it runs on the simulated bench and says so in one line.
"""

from __future__ import annotations

import argparse
import json
import sys
import time

from rtanalyzer.cli.generate import KINDS, add_signal_options, build_signal
from rtanalyzer.cli.knob_options import add_knob_options, knob_changes
from rtanalyzer.errors import RtaError

SOURCES = ("sim", "device", "file")


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


def device_present() -> tuple[bool, str]:
    """Is there a sound card to record from? (and why not, in words)."""
    try:
        import sounddevice as sd
    except (ImportError, OSError) as exc:
        return False, f"no sound device support ({exc.__class__.__name__}: {exc})"
    try:
        devices = sd.query_devices()
    except Exception as exc:  # PortAudio failing to enumerate is "no device" to us
        return False, f"no sound device ({exc})"
    if not any(d["max_input_channels"] > 0 for d in devices):
        return False, "no sound input device found"
    return True, ""


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


def _plan_settings(args: argparse.Namespace, signal, measure: str, carrier_default: float | None) -> dict:
    from rtanalyzer.sources.drive import tones_of

    settings = {"carrier": args.carrier if args.carrier is not None else carrier_default,
                "wanted": args.wanted or "auto"}
    if args.resolution is not None:
        settings["resolution"] = args.resolution
    tones = list(tones_of(signal)[0]) if signal is not None else (args.tone or args.tones)
    if not tones:
        raise RtaError("say which tones the capture holds: --generate ..., --tone HZ or --tones F1 F2")
    if measure == "twotone":
        if len(tones) != 2:
            raise RtaError(f"the two-tone figures need two tones; the plan has {len(tones)}")
        settings["tones"] = tones
    else:
        settings["tone"] = tones
    return settings


def _build(args: argparse.Namespace):
    """Source, signal and plan settings from the options; says in one line what it chose."""
    from rtanalyzer.sources.bench.knobs import BenchKnobs

    source_kind = args.source
    if source_kind is None:
        present, why = device_present()
        source_kind = "device" if present else "sim"
        if not present:
            print(f"rtanalyzer: {why}: using the simulated bench", file=sys.stderr)
    if source_kind == "file":
        from rtanalyzer.sources.file_source import FileSource
        from rtanalyzer.sources.wavfile import read_capture

        if not args.file:
            raise RtaError("--source file needs --file F")
        signal = _signal(args, None)
        source = FileSource(read_capture(args.file), loop=args.loop, block=args.block)
        carrier_default = None
    elif source_kind == "sim":
        from rtanalyzer.sources.bench_source import BenchSource

        knobs = BenchKnobs().with_changes(**knob_changes(args))
        signal = _signal(args, "tone")
        source = BenchSource(knobs, signal, args.rate, args.block)
        carrier_default = knobs.carrier_offset_hz
        if args.wanted is None:
            args.wanted = knobs.wanted_side
    else:
        from rtanalyzer.generator.generator import Generator
        from rtanalyzer.generator.signals import Quadrature
        from rtanalyzer.sources.soundcard import SoundCardSource

        signal = _signal(args, "tone")
        out_channels = 2 if isinstance(signal, Quadrature) else 1
        generator = Generator(signal, args.rate, channels=out_channels)
        channels = args.input_channels or (2 if args.iq else max(1, args.channel or 1))
        source = SoundCardSource(
            input_device=args.input, output_device=args.output, rate_hz=args.rate,
            input_channels=channels, block=args.block, renderer=generator,
        )
        carrier_default = None
    measure = args.measure or ("twotone" if args.kind == "twotone" else "sideband")
    return source, signal, measure, _plan_settings(args, signal, measure, carrier_default)


def run(args: argparse.Namespace) -> int:
    from rtanalyzer.live.engine import LiveEngine, live_nfft
    from rtanalyzer.measurements.registry import get

    if not args.headless:
        print("rtanalyzer: the desktop window is not available yet; showing the live readout here",
              file=sys.stderr)
    source, signal, measure, settings = _build(args)
    nfft = live_nfft(source.rate_hz, args.resolution)
    engine = LiveEngine(source, get(measure), settings, channel=args.channel, iq=bool(args.iq),
                        update_hz=args.update_hz, nfft=nfft, averages=args.average)
    from rtanalyzer.cli.live_display import TerminalDisplay

    display = None if args.jsonl else TerminalDisplay(sys.stdout, source.describe(), measure)
    engine.start()
    started = time.monotonic()
    try:
        while args.seconds is None or time.monotonic() - started < args.seconds:
            try:
                readout = engine.readouts.get(timeout=1.0)
            except Exception:
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
