"""`rtanalyzer analyze <measurement> FILE ...`: one sub-command per measurement plugin.

Options are built from each plugin's declared parameters, so a third-party plugin gets its
own `analyze` sub-command with no change here.
"""

from __future__ import annotations

import argparse

from rtanalyzer.cli.output import print_json
from rtanalyzer.cli.history_options import add_save_options, check_save_options
from rtanalyzer.measurements.base import Measurement


def _option(name: str) -> str:
    return "--" + name.replace("_", "-")


def _add_measurement(sub, plugin: Measurement) -> None:
    p = sub.add_parser(plugin.name, help=plugin.summary, description=plugin.summary)
    p.add_argument("file", metavar="FILE", help="capture to analyse (WAV or FLAC)")
    for par in plugin.parameters:
        unit = f" [{par.unit}]" if par.unit else ""
        default = f" (default {par.default})" if par.default is not None else ""
        kw = dict(type=par.kind, help=f"{par.help}{unit}{default}", default=None, dest=par.name)
        if par.choices:
            kw["choices"] = par.choices
        if par.nargs == "+":
            kw.update(action="extend", nargs="+")
        elif par.nargs is not None:
            kw["nargs"] = par.nargs
        if par.kind is float:
            kw["metavar"] = "HZ" if par.unit == "Hz" else "X"
        p.add_argument(_option(par.name), required=par.required, **kw)
    # A plugin may say which view it reads: "stereo" (left + j·right) needs no --channel/--iq.
    stereo = getattr(plugin, "view", None) == "stereo"
    if not stereo:
        view = p.add_mutually_exclusive_group()
        view.add_argument("--channel", type=int, metavar="N", help="channel to analyse, 1 = left, 2 = right (default 1)")
        view.add_argument("--iq", action="store_true", help="stereo I/Q capture: I left, Q right")
    p.add_argument("--calibration", action="extend", nargs="+", metavar="NAME", default=None,
                   help="apply calibration profile NAME (calibration/NAME.cal, or a path); repeat for several")
    p.add_argument("--json", action="store_true", help="print exactly one JSON object")
    add_save_options(p)
    p.set_defaults(func=run, measurement=plugin.name, stereo=stereo, channel=None, iq=False)


def add_parser(subparsers) -> None:
    from rtanalyzer.measurements.registry import available

    p = subparsers.add_parser("analyze", help="measure a recorded capture", description="Measure a recorded capture.")
    sub = p.add_subparsers(dest="measurement_name", metavar="MEASUREMENT", parser_class=type(p))
    sub.required = True
    for plugin in available().values():
        _add_measurement(sub, plugin)


def run(args: argparse.Namespace) -> int:
    import inspect

    from rtanalyzer.cli.progress import terminal_progress
    from rtanalyzer.cli.text import render
    from rtanalyzer.measurements.calibration import CalibrationSet
    from rtanalyzer.measurements.quadrature import stereo_view
    from rtanalyzer.measurements.registry import get
    from rtanalyzer.sources.wavfile import read_capture

    check_save_options(args)
    plugin = get(args.measurement)
    capture = read_capture(args.file)
    if args.stereo:
        signal = stereo_view(capture, f"analyze {plugin.name}")
    else:
        signal = capture.view(channel=args.channel, iq=args.iq)
    calibration = CalibrationSet.load(args.calibration or (), signal.rate_hz, args.file)
    signal = calibration.prepare(signal)
    settings = {par.name: getattr(args, par.name) for par in plugin.parameters}
    extra = {}
    if "progress" in inspect.signature(plugin.measure).parameters:
        extra["progress"] = terminal_progress(f"{plugin.name}: tone")
    result = plugin.measure(signal, settings, **extra)
    figures = calibration.finish(result.to_json(), signal)
    if args.json:
        print_json(figures)
    else:
        header = f"{plugin.name} · {args.file} · {signal.label} · {signal.rate_hz:g} Hz · {signal.seconds:.1f} s"
        print(render(plugin.name, figures, header))
    if args.save:
        from rtanalyzer.cli.history_options import save_analysis

        save_analysis(args, plugin, capture, signal, settings, figures)
    return 0
