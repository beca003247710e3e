"""``rtanalyzer devices``: the sound devices PortAudio sees, with the numbers to pass as --device."""

from __future__ import annotations

import argparse
import json


def _table(devices: list[dict]) -> str:
    """One line per device; ``*`` marks the default input (first column) and output (second)."""
    if not devices:
        return "no sound devices found (no sound card, or no sound server running?)\n"
    width = max(len("name"), *(len(d["name"]) for d in devices))
    api_width = max(len("host API"), *(len(d["hostapi"]) for d in devices))
    header = f"in out {'index':>5}  {'name':<{width}}  {'host API':<{api_width}}  {'in ch':>5}  {'out ch':>6}"
    lines = [header + "  default rate"]
    for d in devices:
        marks = f"{'*' if d['default_input'] else ' ':>2} {'*' if d['default_output'] else ' ':>3}"
        lines.append(
            f"{marks} {d['index']:>5}  {d['name']:<{width}}  {d['hostapi']:<{api_width}}  "
            f"{d['max_input_channels']:>5}  {d['max_output_channels']:>6}  {d['default_samplerate_hz']:g} Hz"
        )
    lines.append("* = default input (in) / output (out) device")
    return "\n".join(lines) + "\n"


def _run(args) -> int:
    import sys

    from rtanalyzer.sources.soundcard_devices import list_devices

    devices = list_devices()
    if args.json:
        sys.stdout.write(json.dumps(devices, indent=2) + "\n")
    else:
        sys.stdout.write(_table(devices))
    return 0


def add_parser(subparsers) -> argparse.ArgumentParser:
    """Register the ``devices`` command."""
    parser = subparsers.add_parser(
        "devices",
        help="list the sound devices (index, name, host API, channels, default rate)",
        description="List the sound devices PortAudio can open: index, name, host API, most input "
        "and output channels, default sample rate, and which are the defaults. A device can be "
        "given to other commands by its index or a part of its name.",
    )
    parser.add_argument("--json", action="store_true", help="print the list as JSON")
    parser.set_defaults(func=_run)
    return parser
