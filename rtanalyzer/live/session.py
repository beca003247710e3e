"""A live session from one description: source, test signal, frequency plan, measurement.

The terminal readout and the desktop window both describe what they want as a
``SessionConfig`` and get a ready ``LiveEngine`` from :func:`build_engine`.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from rtanalyzer.errors import RtaError
from rtanalyzer.live.engine import LiveEngine, live_nfft
from rtanalyzer.sources.bench.knobs import BenchKnobs
from rtanalyzer.sources.drive import tones_of

SOURCES = ("sim", "device", "file")
RATES = (44_100, 48_000, 96_000, 192_000)
MAX_AVERAGES = 64
# Longest live window a closely spaced multitone may ask for (about 1.4 s at 48 kHz).
MAX_LIVE_NFFT = 1 << 16


@dataclass(frozen=True)
class SessionConfig:
    """Everything a live session needs; front ends fill it from options or controls."""

    source: str | None = None  # None: the sound card if there is one, else the simulated bench
    signal: Any = None  # a generator signal (rtanalyzer.generator.signals), or None
    knobs: BenchKnobs = field(default_factory=BenchKnobs)
    rate_hz: int = 48_000
    block: int = 1024
    input_device: str | None = None
    output_device: str | None = None
    input_channels: int | None = None
    file: str | None = None
    loop: bool = False
    tones_hz: tuple[float, ...] = ()  # plan tones when no signal says them
    carrier_hz: float | None = None
    wanted: str | None = None
    channel: int | None = None
    iq: bool = False
    measurement: str | None = None
    update_hz: float = 20.0
    averages: int = 1
    resolution_hz: float | None = None
    calibration: tuple[str, ...] = ()  # calibration profile names (rtanalyzer.measurements.calibration)
    muted: bool = False  # a sound card's generator starts silent (the window's mute survives a rebuild)
    band_hz: tuple[float, float] | None = None  # the band whose worst point is the figure (None: 300-3000 Hz)

    def __post_init__(self) -> None:
        # Named by their command-line options, the front end most people type into.
        checks = (
            ("--average", self.averages, 1, MAX_AVERAGES, "spectra"),
            ("--block", self.block, 64, 16_384, "frames"),
            ("--update-hz", self.update_hz, 0.5, 100.0, "readouts/s"),
        )
        for name, value, low, high, unit in checks:
            if not (low <= value <= high):
                raise RtaError(f"{name} {value:g} is out of range; allowed {low:g}..{high:g} {unit}")
        if self.resolution_hz is not None and not (0.5 <= self.resolution_hz <= 200.0):
            raise RtaError(f"--resolution {self.resolution_hz:g} Hz is out of range; allowed 0.5..200 Hz")
        if self.rate_hz not in RATES:
            raise RtaError(f"--rate {self.rate_hz:g} Hz is not offered; allowed {', '.join(str(r) for r in RATES)}")
        if self.source not in (None, "file") and (self.file or self.loop):
            raise RtaError("--file and --loop go with --source file")

    def with_changes(self, **changes: Any) -> SessionConfig:
        return replace(self, **changes)

    @property
    def measurement_name(self) -> str:
        from rtanalyzer.generator.signals import TwoTone

        if self.measurement:
            return self.measurement
        if isinstance(self.signal, TwoTone):
            return "twotone"
        return "sideband"


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


def resolve_source(config: SessionConfig) -> tuple[SessionConfig, str | None]:
    """Pick the source when none was named; the notice says so in one line (or None)."""
    if config.source is not None:
        if config.source not in SOURCES:
            raise RtaError(f"source '{config.source}': choose one of {', '.join(SOURCES)}")
        return config, None
    present, why = device_present()
    if present:
        return config.with_changes(source="device"), None
    return config.with_changes(source="sim"), f"{why}: using the simulated bench"


def build_source(config: SessionConfig):
    """The live source the config names (``source`` must be resolved)."""
    if config.source == "file":
        from rtanalyzer.sources.file_source import FileSource
        from rtanalyzer.sources.wavfile import read_capture

        if not config.file:
            raise RtaError("--source file needs --file F")
        return FileSource(read_capture(config.file), loop=config.loop, block=config.block)
    if config.source == "sim" and config.measurement_name == "quadrature":
        from rtanalyzer.generator.signals import Tone
        from rtanalyzer.sources.network_source import NetworkSource

        # The bench's network outputs (left = I, right = Q): what a phase-network capture holds.
        return NetworkSource(config.knobs, config.signal or Tone(1000.0, -6.0), config.rate_hz, config.block)
    if config.source == "sim":
        from rtanalyzer.generator.signals import Tone
        from rtanalyzer.sources.bench_source import BenchSource

        return BenchSource(config.knobs, config.signal or Tone(1000.0, -6.0), config.rate_hz, config.block)
    from rtanalyzer.generator.generator import Generator
    from rtanalyzer.generator.signals import Quadrature
    from rtanalyzer.sources.soundcard import SoundCardSource

    generator = None
    if config.signal is not None:
        generator = Generator(config.signal, config.rate_hz, channels=2 if isinstance(config.signal, Quadrature) else 1)
    channels = config.input_channels or (2 if config.iq else max(1, config.channel or 1))
    source = SoundCardSource(
        input_device=config.input_device, output_device=config.output_device, rate_hz=config.rate_hz,
        input_channels=channels, block=config.block, renderer=generator,
    )
    if config.muted:
        source.mute()  # before the streams open: the first output callback is already silent
    return source


def plan_settings(config: SessionConfig, measurement: str) -> dict[str, Any]:
    """The measurement's settings: tones from the signal (or the plan), carrier, side."""
    carrier = config.carrier_hz
    wanted = config.wanted
    if config.source == "sim":
        carrier = config.knobs.carrier_offset_hz if carrier is None else carrier
        wanted = wanted or config.knobs.wanted_side
    if carrier is not None and not config.iq and carrier <= 0 and measurement != "quadrature":
        raise RtaError(f"--carrier {carrier:g}: in a one-channel capture the carrier lands at a positive audio "
                       "frequency (e.g. --carrier 4000); a negative one needs --iq")
    settings: dict[str, Any] = {"carrier": carrier, "wanted": wanted or "auto"}
    if config.resolution_hz is not None:
        settings["resolution"] = config.resolution_hz
    if config.band_hz is not None and _takes(measurement, "band"):
        settings["band"] = list(config.band_hz)
    if measurement == "quadrature":  # carrier and side kept for the window's plan changes; unused
        return {**settings, **_quadrature_settings(config)}
    tones = list(tones_of(config.signal)[0]) if config.signal is not None else list(config.tones_hz)
    if not tones:
        raise RtaError("say which tones the capture holds: --generate ..., --tone HZ or --tones F1 F2")
    if measurement == "twotone":
        if len(tones) != 2:
            raise RtaError(f"the two-tone figures need two tones; the plan has {len(tones)}")
        settings["tones"] = tones
    else:
        settings["tone"] = tones
    return settings


def _takes(measurement: str, parameter: str) -> bool:
    """Does the measurement plugin declare this parameter?"""
    from rtanalyzer.measurements.registry import get

    return any(p.name == parameter for p in get(measurement).parameters)


def _quadrature_settings(config: SessionConfig) -> dict[str, Any]:
    """Phase-network settings: the signal's steady tones (or the plan's) as an optional restriction;
    none for a sweep or when nothing says them (every tone found is measured)."""
    from rtanalyzer.generator.signals import Sweep

    settings: dict[str, Any] = {"resolution": config.resolution_hz or config.rate_hz / session_nfft(config, config.rate_hz)}
    if config.signal is not None and not isinstance(config.signal, Sweep):
        settings["tone"] = list(tones_of(config.signal)[0])
    elif config.signal is None and config.tones_hz:
        settings["tone"] = list(config.tones_hz)
    return settings


def session_nfft(config: SessionConfig, rate_hz: float) -> int:
    """The live window for this session: about 85 ms, or longer when the test signal's closest
    components (a dense multitone's neighbours, or a wanted and an unwanted sideband near the
    carrier) would otherwise fall within the plan's collision guard; a --resolution wins."""
    from rtanalyzer.dsp.noise import MAIN_LOBE_BINS

    nfft = live_nfft(rate_hz, config.resolution_hz)
    gap = None if config.resolution_hz is not None else _closest_gap_hz(config)
    if not gap:
        return nfft
    need = 2 * MAIN_LOBE_BINS * rate_hz / gap  # the plan's collision guard is 2·MAIN_LOBE_BINS bins
    return int(min(MAX_LIVE_NFFT, max(nfft, 2 ** int(np.ceil(np.log2(need))))))


def _closest_gap_hz(config: SessionConfig) -> float | None:
    """Closest spacing of the components the measurement must tell apart (None: nothing to say)."""
    from rtanalyzer.generator.signals import Sweep

    if config.signal is None or isinstance(config.signal, Sweep):
        return None
    tones = sorted(tones_of(config.signal)[0])
    places = list(tones)
    carrier = config.carrier_hz
    if carrier is None and config.source == "sim":
        carrier = config.knobs.carrier_offset_hz
    if carrier is not None and config.measurement_name == "sideband":
        places = [carrier] + [carrier + f for f in tones] + [carrier - f for f in tones]
        if not config.iq:
            places = [abs(f) for f in places]
    places.sort()
    gaps = [b - a for a, b in zip(places, places[1:]) if b - a > 0]
    return min(gaps) if gaps else None


def build_engine(config: SessionConfig) -> LiveEngine:
    """A ready (not started) engine for a resolved config."""
    from rtanalyzer.measurements.registry import get

    name = config.measurement_name
    if config.source == "file" and not config.file:
        raise RtaError("--source file needs --file F")
    settings = plan_settings(config, name)
    measurement = get(name)
    iq = config.iq or getattr(measurement, "view", None) == "stereo"  # left + j·right
    source = build_source(config)  # not started yet: a bad calibration below costs nothing
    calibration = _calibration(config, name, iq, source.rate_hz)
    nfft = session_nfft(config, source.rate_hz)
    return LiveEngine(source, measurement, settings, channel=config.channel, iq=iq,
                      update_hz=config.update_hz, nfft=nfft, averages=config.averages, calibration=calibration)


def _calibration(config: SessionConfig, measurement: str, iq: bool, rate_hz: float):
    """The chosen profiles, loaded and checked against the session before any audio starts."""
    from rtanalyzer.measurements.calibration import CalibrationSet

    if not config.calibration:
        return None
    where = {"sim": "the simulated bench", "device": "the sound card", "file": "the file"}.get(config.source, "the session")
    chosen = CalibrationSet.load(config.calibration, rate_hz, where)
    chosen.check(measurement, iq)
    return chosen
