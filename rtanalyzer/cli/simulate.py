"""``rtanalyzer simulate``: write a capture of the simulated bench and its exact truth beside it."""

from __future__ import annotations

import argparse
import json
import math
import sys
from pathlib import Path

from rtanalyzer.cli.knob_options import add_knob_options, knob_changes
from rtanalyzer.errors import RtaError

_SUBTYPES = {"pcm16": "PCM_16", "pcm24": "PCM_24", "float32": "FLOAT"}


def add_parser(subparsers) -> argparse.ArgumentParser:
    """Register ``simulate`` on the ``rtanalyzer`` sub-command parser."""
    parser = subparsers.add_parser(
        "simulate",
        help="write a capture of the simulated bench (WAV/FLAC) and its exact truth (JSON)",
        description="Render the simulated phasing exciter, receiver and sound card to a file, "
        "with FILE.json beside it holding the exact figures of the setting. Knobs left out keep "
        "the demo rig's values.",
    )
    tones = parser.add_mutually_exclusive_group()
    tones.add_argument("--tone", type=float, nargs="+", action="extend", metavar="HZ",
                       help="audio tone(s), Hz (default 1000)")
    tones.add_argument("--tones", type=float, nargs=2, metavar=("F1", "F2"), help="two-tone test, Hz")
    parser.add_argument("--levels-db", type=float, nargs="+", metavar="DB",
                        help="relative level of each tone, dB (default equal)")
    add_knob_options(parser)
    parser.add_argument("--wanted", choices=("above", "below"), default=None,
                        help="wanted sideband above or below the carrier in the capture")
    parser.add_argument("--iq", action="store_const", const=True, default=None,
                        help="I/Q capture (stereo: I left, Q right)")
    parser.add_argument("--seconds", type=float, default=4.0, help="length of the capture (default 4)")
    parser.add_argument("--rate", type=float, default=48000.0, help="sample rate, Hz (default 48000)")
    parser.add_argument("--seed", type=int, default=0, help="seed of the sound card noise (default 0)")
    parser.add_argument("--out", required=True, metavar="FILE",
                        help="FILE.wav or FILE.flac; FILE.json is written beside it")
    parser.add_argument("--json", action="store_true", help="also print the truth as JSON on stdout")
    parser.set_defaults(func=run)
    return parser


def run(args: argparse.Namespace) -> int:
    """Render, write FILE and FILE.json, say what was written; return 0."""
    from rtanalyzer.sources.bench import BenchKnobs, simulate_capture

    knobs = BenchKnobs().with_changes(**knob_changes(args))
    tones = args.tones or args.tone or [1000.0]
    if not math.isfinite(args.rate) or args.rate != int(args.rate):
        raise RtaError(f"--rate {args.rate:g} must be a whole number of Hz")
    out = Path(args.out)
    suffix = out.suffix.lower()
    if suffix not in (".wav", ".flac"):
        raise RtaError(f"--out {out}: the file must end in .wav or .flac")
    if suffix == ".flac" and knobs.adc == "float32":
        raise RtaError("--adc float32 cannot be stored in FLAC; use a .wav file or --adc pcm16/pcm24")
    samples, truth = simulate_capture(knobs, tones, args.seconds, int(args.rate), args.levels_db, args.seed)
    sidecar = out.with_suffix(".json")
    text = json.dumps(truth, indent=2, allow_nan=False)
    _write_audio(out, samples, int(args.rate), knobs.adc)
    try:
        sidecar.write_text(text + "\n", encoding="utf-8")
    except OSError as exc:
        raise RtaError(f"cannot write {sidecar}: {exc.strerror or exc}") from None
    channels = samples.shape[1]
    line = (
        f"wrote {out} ({samples.shape[0] / args.rate:g} s, {int(args.rate)} Hz, "
        f"{'I/Q stereo' if channels == 2 else 'mono'}, {_SUBTYPES[knobs.adc]}) and its truth {sidecar}"
    )
    if args.json:
        print(text)
        print(line, file=sys.stderr)
    else:
        print(line)
    return 0


def _write_audio(path: Path, samples, rate: int, adc: str) -> None:
    """Write samples exactly: integer codes for PCM (no float rescaling by libsndfile)."""
    import numpy as np
    import soundfile

    if adc == "pcm16":
        data = np.round(samples * 2.0**15).astype(np.int16)
    elif adc == "pcm24":
        data = np.round(samples * 2.0**23).astype(np.int32) * 256  # 24-bit code, left-justified
    else:
        data = samples.astype(np.float32)
    try:
        soundfile.write(str(path), data, rate, subtype=_SUBTYPES[adc])
    except (OSError, RuntimeError, soundfile.LibsndfileError) as exc:
        raise RtaError(f"cannot write {path}: {exc}") from None
