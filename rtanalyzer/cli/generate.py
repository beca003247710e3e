"""``rtanalyzer generate``: write a test signal to a sound file or play it on a sound card.

The signal fades in at the start and out at the end (the generator's raised-cosine ramps), so
the file or the played sound never starts or stops with a click, and its level is capped by
the generator's ceiling (-0.5 dBFS).
"""

from __future__ import annotations

import argparse
import re
import math

from rtanalyzer.generator.errors import GeneratorError, OutputDeviceError

KINDS = ("tone", "twotone", "multitone", "sweep", "quadrature")
#: Most samples (frames x channels) rendered in one go: about 11 minutes of mono at 48 kHz.
MAX_SAMPLES = 2**25
_DEFAULT_SECONDS = 5.0
_DEFAULT_LEVEL_DBFS = -6.0

# option dest -> the kinds it applies to
_OWN_OPTIONS = {
    "freq": ("tone", "quadrature"),
    "tones": ("twotone",),
    "ratio_db": ("twotone",),
    "band": ("multitone",),
    "count": ("multitone",),
    "spacing": ("multitone",),
    "start": ("sweep",),
    "stop": ("sweep",),
    "steps": ("sweep",),
    "dwell": ("sweep",),
    "settle": ("sweep",),
    "amplitude_db": ("quadrature",),
    "phase_offset_deg": ("quadrature",),
}
# signal field named in a GeneratorError -> the option that sets it (by kind where it differs)
_FIELD_OPTIONS = {
    "frequency_hz": "--freq",
    "ratio_db": "--ratio-db",
    "count": "--count",
    "start_hz": "--start",
    "stop_hz": "--stop",
    "steps": "--steps",
    "dwell_s": "--dwell",
    "settle_s": "--settle",
    "amplitude_db": "--amplitude-db",
    "phase_offset_deg": "--phase-offset-deg",
    "level_dbfs": "--level-dbfs",
    "rate_hz": "--rate",
}
_KIND_FIELD_OPTIONS = {
    "twotone": {"low_hz": "--tones", "high_hz": "--tones"},
    "multitone": {"low_hz": "--band", "high_hz": "--band", "frequencies_hz": "--band"},
    "sweep": {"frequencies_hz": "--start/--stop"},
}

def _option(dest: str) -> str:
    return "--" + dest.replace("_", "-")


def add_signal_options(parser: argparse.ArgumentParser) -> None:
    """The options that describe a test signal (shared with `rtanalyzer live`)."""
    sig = parser.add_argument_group("signal (each option applies to the kinds named)")
    sig.add_argument("--freq", type=float, metavar="HZ", help="tone, quadrature: frequency, Hz (default 1000)")
    sig.add_argument("--tones", type=float, nargs=2, metavar=("F1", "F2"),
                     help="twotone: the two frequencies, Hz (default 700 1900)")
    sig.add_argument("--ratio-db", type=float, metavar="X", help="twotone: high tone relative to low, dB (default 0)")
    sig.add_argument("--band", type=float, nargs=2, metavar=("LO", "HI"),
                     help="multitone: lowest and highest tone, Hz (default 300 3000)")
    sig.add_argument("--count", type=int, metavar="N", help="multitone: number of tones (default 16)")
    sig.add_argument("--spacing", choices=("log", "linear"), help="multitone: tone spacing (default log)")
    sig.add_argument("--start", type=float, metavar="HZ", help="sweep: first frequency, Hz (default 300)")
    sig.add_argument("--stop", type=float, metavar="HZ", help="sweep: last frequency, Hz (default 3000)")
    sig.add_argument("--steps", type=int, metavar="N", help="sweep: number of log-spaced steps (default 10)")
    sig.add_argument("--dwell", type=float, metavar="S", help="sweep: time on each step, s (default 0.5)")
    sig.add_argument("--settle", type=float, metavar="S",
                     help="sweep: start of each step an analysis should discard, s (default 0.1)")
    sig.add_argument("--amplitude-db", type=float, metavar="X",
                     help="quadrature: Q amplitude relative to I, dB (default 0)")
    sig.add_argument("--phase-offset-deg", type=float, metavar="X",
                     help="quadrature: Q = sin(wt + X) against I = cos(wt), degrees (default 0)")
    parser.add_argument("--level-dbfs", type=float, default=_DEFAULT_LEVEL_DBFS, metavar="X",
                   help=f"peak level (two-tone: PEP), dBFS (default {_DEFAULT_LEVEL_DBFS:g})")


def add_parser(subparsers) -> argparse.ArgumentParser:
    """Register ``generate`` on the ``rtanalyzer`` sub-command parser."""
    p = subparsers.add_parser(
        "generate",
        help="write a test signal to a WAV file or play it on a sound card",
        description="Generate a test signal (tone, two-tone, Schroeder multitone, stepped sweep or "
        "I/Q quadrature pair) with a fade in and out, to a file or a sound card. Levels are dBFS "
        "peak (two-tone: PEP), capped at -0.5 dBFS.",
    )
    p.add_argument("kind", choices=KINDS, help="signal to generate")
    add_signal_options(p)
    p.add_argument("--rate", type=float, default=48000.0, metavar="R", help="sample rate, Hz (default 48000)")
    p.add_argument("--seconds", type=float, default=None, metavar="S",
                   help=f"length including the fades, s (default {_DEFAULT_SECONDS:g}; sweep: one pass)")
    where = p.add_mutually_exclusive_group(required=True)
    where.add_argument("--out", metavar="FILE", help="write FILE.wav (or .flac)")
    where.add_argument("--device", metavar="DEV", help="play on sound card DEV (number or part of its name)")
    p.add_argument("--subtype", choices=("PCM_16", "PCM_24", "FLOAT"), default=None,
                   help="sample format of --out (default PCM_24)")
    p.set_defaults(shows_cautions=True, func=run)
    return p


def _check_options(args: argparse.Namespace) -> None:
    for dest, kinds in _OWN_OPTIONS.items():
        if getattr(args, dest) is not None and args.kind not in kinds:
            raise GeneratorError(f"{_option(dest)} applies to {' and '.join(kinds)}, not to {args.kind}")
    if getattr(args, "subtype", None) is not None and args.out is None:
        raise GeneratorError("--subtype applies to --out, not to --device")
    if getattr(args, "out", None) is not None and not args.out.lower().endswith((".wav", ".flac")):
        raise GeneratorError(f"--out {args.out!r} is not a sound file name; allowed: a name ending in .wav or .flac")


def _or(value, default):
    return default if value is None else value


def build_signal(args: argparse.Namespace):
    """The signal description the options ask for.

    Raises
    ------
    GeneratorError
        For an option given to the wrong kind or a value out of range (naming the option).
    """
    from rtanalyzer.generator.signals import Multitone, Quadrature, Sweep, Tone, TwoTone

    _check_options(args)
    level = args.level_dbfs
    try:
        if args.kind == "tone":
            return Tone(_or(args.freq, 1000.0), level)
        if args.kind == "twotone":
            low, high = _or(args.tones, (700.0, 1900.0))
            return TwoTone(low, high, level, _or(args.ratio_db, 0.0))
        if args.kind == "multitone":
            low, high = _or(args.band, (300.0, 3000.0))
            return Multitone.spread(low, high, _or(args.count, 16), level, _or(args.spacing, "log"))
        if args.kind == "sweep":
            return Sweep.log_range(_or(args.start, 300.0), _or(args.stop, 3000.0), _or(args.steps, 10), level,
                                   _or(args.dwell, 0.5), _or(args.settle, 0.1))
        return Quadrature(_or(args.freq, 1000.0), level, _or(args.amplitude_db, 0.0), _or(args.phase_offset_deg, 0.0))
    except GeneratorError as exc:
        raise _with_option(exc, args.kind) from None


def _with_option(exc: GeneratorError, kind: str) -> GeneratorError:
    """The same error, naming the command-line option behind the first field it mentions."""
    text = str(exc)
    options = {**_FIELD_OPTIONS, **_KIND_FIELD_OPTIONS.get(kind, {})}
    found = [(text.find(field), option) for field, option in options.items() if field in text]
    if not found:
        return exc
    option = min(found)[1]
    # "Multitone.spread low_hz = -200.0 is out of range; ..." -> "--band: low_hz = -200.0 is ..."
    # (the option the user typed first, not the class behind it)
    owner = re.match(r"[A-Z]\w*(?:\.\w+)? (?=\w+ = )", text)
    return type(exc)(f"{option}: {text[owner.end():] if owner else text}")


def render_signal(signal, rate_hz: float, seconds: float):
    """All samples of ``signal``: fade in, steady part, fade out ending on a zero sample.

    Returns
    -------
    (ndarray, Generator)
        Samples of shape (frames, channels) and the generator that made them.
    """
    from rtanalyzer.generator.generator import Generator
    from rtanalyzer.generator.signals import Quadrature

    channels = 2 if isinstance(signal, Quadrature) else 1
    gen = Generator(signal, rate_hz, channels=channels)
    frames = int(round(seconds * rate_hz))
    fade = gen.ramp_frames
    shortest = 2 * fade + 1
    longest = MAX_SAMPLES // channels
    if not (math.isfinite(seconds) and shortest <= frames <= longest):
        raise GeneratorError(
            f"--seconds {seconds:g} is out of range; allowed: {shortest / rate_hz:g} to "
            f"{longest / rate_hz:g} s at {rate_hz:g} Hz ({channels} channel{'s' if channels > 1 else ''})"
        )
    import numpy as np

    out = np.empty((frames, channels))
    gen.render_into(out[: frames - fade])
    gen.stop()
    gen.render_into(out[frames - fade:])
    return out, gen


def describe(signal, level_played: float) -> str:
    """One phrase for the signal and the level it was played at, e.g. ``"tone 1000 Hz at -6 dBFS peak"``."""
    from rtanalyzer.generator.signals import Multitone, Quadrature, Sweep, Tone, TwoTone

    if isinstance(signal, Tone):
        what, kind = f"tone {signal.frequency_hz:g} Hz", "peak"
    elif isinstance(signal, TwoTone):
        what, kind = f"two-tone {signal.low_hz:g} + {signal.high_hz:g} Hz (high {signal.ratio_db:+g} dB re low)", "PEP"
    elif isinstance(signal, Multitone):
        f = signal.frequencies_hz
        what, kind = f"Schroeder multitone of {len(f)} tones {f[0]:g}-{f[-1]:g} Hz", "peak"
    elif isinstance(signal, Sweep):
        f = signal.frequencies_hz
        what = (f"stepped sweep of {len(f)} steps {f[0]:g}-{f[-1]:g} Hz ({signal.dwell_s:g} s each, "
                f"first {signal.settle_s:g} s settling)")
        kind = "peak"
    else:
        assert isinstance(signal, Quadrature)
        what = (f"quadrature pair {signal.frequency_hz:g} Hz (I left, Q right; Q {signal.amplitude_db:+g} dB, "
                f"{signal.phase_offset_deg:+g}° offset)")
        kind = "peak"
    level = f"{level_played:g} dBFS {kind}"
    if level_played < signal.level_dbfs:
        level += f" (the {signal.level_dbfs:g} dBFS asked for is above the ceiling)"
    return f"{what} at {level}"


def run(args: argparse.Namespace) -> int:
    """Build, render and write or play the signal; print one line saying what was done."""
    rate = args.rate
    if not math.isfinite(rate) or rate != int(rate):
        raise GeneratorError(f"--rate {rate:g} is out of range; allowed: a whole number of Hz, 8000 to 192000")
    signal = build_signal(args)
    if args.seconds is not None:
        seconds = args.seconds
    elif args.kind == "sweep":
        seconds = len(signal.frequencies_hz) * signal.dwell_s
    else:
        seconds = _DEFAULT_SECONDS
    try:
        samples, gen = render_signal(signal, float(rate), seconds)
    except GeneratorError as exc:
        raise _with_option(exc, args.kind) from None
    layout = "stereo" if samples.shape[1] == 2 else "mono"
    length = f"{samples.shape[0] / rate:g} s, {int(rate)} Hz, {layout}"
    if args.out is not None:
        from rtanalyzer.sources.wavfile import write_capture

        subtype = args.subtype or "PCM_24"
        write_capture(args.out, samples, rate, subtype)
        print(f"wrote {args.out}: {describe(signal, gen.level_dbfs)}, {length}, {subtype}")
    else:
        name = play(samples, int(rate), args.device)
        print(f"played on {name}: {describe(signal, gen.level_dbfs)}, {length}")
    return 0


# -- sound card ---------------------------------------------------------------------------------


def _sounddevice():
    """Import sounddevice, or say in one line what to install."""
    try:
        import sounddevice
    except ImportError as exc:
        raise OutputDeviceError(
            f"cannot play to a sound card: the 'sounddevice' package is missing ({exc}); "
            "install it with: pip install sounddevice (PortAudio too: apt-get install libportaudio2)"
        ) from None
    except OSError as exc:  # sounddevice found no PortAudio library
        raise OutputDeviceError(
            f"cannot play to a sound card: the PortAudio library was not found ({exc}); install it "
            "(Debian/Ubuntu: apt-get install libportaudio2), then pip install sounddevice"
        ) from None
    return sounddevice


def _candidates(sd) -> str:
    try:
        devices = list(sd.query_devices())
    except Exception as exc:  # PortAudio failing to list devices at all
        return f"(the device list cannot be read: {exc})"
    outputs = [f"{d['index']} '{d['name']}'" for d in devices if d.get("max_output_channels", 0) > 0]
    return "; ".join(outputs) if outputs else "none found (no sound card?)"


def play(samples, rate_hz: int, device: str) -> str:
    """Play ``samples`` on ``device`` (a number or part of a name), blocking; return the device's name.

    Raises
    ------
    OutputDeviceError
        sounddevice or PortAudio missing, no such or ambiguous device (the line lists the output
        devices), too few output channels, or a PortAudio error while playing.
    """
    sd = _sounddevice()
    key = int(device) if str(device).strip().isdigit() else device
    try:
        info = sd.query_devices(key, "output")
    except (ValueError, sd.PortAudioError) as exc:
        detail = str(exc).strip().rstrip(".").replace("\n", " ")
        raise OutputDeviceError(f"--device {device!r}: {detail}; output devices: {_candidates(sd)}") from None
    name = str(info["name"])
    channels = samples.shape[1]
    if info["max_output_channels"] < channels:
        raise OutputDeviceError(
            f"--device {device!r} ('{name}') has {info['max_output_channels']} output channel(s); "
            f"this signal needs {channels}; output devices: {_candidates(sd)}"
        )
    try:
        sd.play(samples, samplerate=rate_hz, device=key, blocking=True)
    except (sd.PortAudioError, ValueError) as exc:
        detail = str(exc).strip().rstrip(".").replace("\n", " ")
        raise OutputDeviceError(
            f"sound card '{name}' cannot play {rate_hz} Hz {channels}-channel audio: {detail}"
        ) from None
    finally:
        try:
            sd.stop()
        except Exception:  # nothing more to stop, or PortAudio already gone
            pass
    return name
