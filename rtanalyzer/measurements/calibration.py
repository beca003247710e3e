"""Calibration profiles: the measuring chain's own errors, measured once and taken out of results.

Three kinds, each a small text file (format below, also described in ``calibration/README.md``):

``channels``
    The right sound-card input relative to the left: gain (dB), phase (degrees) and delay
    (seconds), from a capture with the same signal fed to both inputs. Applied to stereo
    analyses (``analyze quadrature``, ``--iq``) by dividing the right channel's spectrum by
    ``g·exp(j(φ0 - 2πfτ))``.
``passband``
    The receiver's gain against audio frequency, relative to its mean, from a flat multitone
    through the receiving path. Applied to ``analyze sideband`` and ``analyze twotone``: each level
    (wanted and unwanted; tones and IMD products) is corrected at its own audio frequency, so
    components on different slopes compare fairly, and the figures made from them are recomputed.
``level``
    Volts RMS of a 0 dBFS sine at each input, from a sine of known voltage. Applied to every
    analysis: each ``..._dbfs`` figure gains a ``..._dbv`` twin (dB relative to 1 V RMS).

File format (version 1)::

    # comment (a '#' at the start of a line, or after a space, starts a comment)
    format = rtanalyzer-calibration 1
    kind = channels            # channels | passband | level
    name = desk-card
    date = 2026-12-02T10:00:00
    rate_hz = 48000            # the capture rate it was made at; it must match when applied
    device = desk card, line in
    made_from = cal-channels.wav
    gain_db = 0.2              # channels: right over left
    phase_deg = 0.5            # channels: right minus left, extrapolated to 0 Hz
    delay_s = 1.5e-06          # channels: right later than left
    point = 300 -0.52          # passband: frequency (Hz) and gain (dB), one line per point
    channel_1_full_scale_vrms = 1.23   # level: volts RMS of a 0 dBFS sine on channel 1

Every key is on its own line as ``key = value``; only ``point`` may repeat. Units are SI (Hz, s,
dB, degrees, V).
"""

from __future__ import annotations

import dataclasses
import datetime as _dt
import functools
import os
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable, Iterable

import numpy as np

from rtanalyzer.dsp.quadrature import correct_right_channel
from rtanalyzer.dsp.tones import tone_near
from rtanalyzer.errors import CaptureError, MeasurementError
from rtanalyzer.measurements.component import spectrum_of
from rtanalyzer.measurements.quadrature import find_tones, measure_quadrature
from rtanalyzer.measurements.sideband import worst_in_band
from rtanalyzer.sources.capture import Capture, Signal

FORMAT = "rtanalyzer-calibration 1"
KINDS = ("channels", "passband", "level")
SUFFIX = ".cal"
DIR_ENV = "RTANALYZER_CALIBRATION_DIR"
DEFAULT_DIR = "calibration"
HEADER_KEYS = ("format", "kind", "name", "date", "rate_hz", "device", "made_from")
VALUE_KEYS = {
    "channels": ("gain_db", "phase_deg", "delay_s", "residual_deg", "low_hz", "high_hz", "tones"),
    "passband": (),
    "level": (),
}
_LEVEL_KEY = re.compile(r"channel_(\d+)_full_scale_vrms$")
_NAME = re.compile(r"[A-Za-z0-9][A-Za-z0-9._-]*$")
#: Largest channel phase difference a channels calibration accepts, degrees: more means the
#: inputs were not fed the same signal.
MAX_CHANNEL_PHASE_DEG = 20.0  # at 0 Hz, once the delay is fitted
#: Largest skew between the inputs it accepts (48 samples at 48 kHz): more is two sources.
MAX_CHANNEL_DELAY_S = 1e-3
#: Largest departure from gain + phase + delay it accepts, degrees rms over the tones.
MAX_CHANNEL_RESIDUAL_DEG = 2.0


@dataclass(frozen=True)
class Profile:
    """One calibration profile (see the module docstring for the meaning of the values)."""

    kind: str
    name: str
    rate_hz: float
    date: str = ""
    device: str = "unknown"
    made_from: str = ""
    values: dict[str, float] = field(default_factory=dict)
    points: tuple[tuple[float, float], ...] = ()

    def text(self) -> str:
        """The profile in the file format."""
        lines = [
            "# rtanalyzer calibration profile; format described in calibration/README.md",
            f"format = {FORMAT}",
            f"kind = {self.kind}",
            f"name = {self.name}",
            f"date = {self.date}",
            f"rate_hz = {self.rate_hz:g}",
            f"device = {self.device}",
            f"made_from = {self.made_from}",
        ]
        if self.kind == "channels":
            lines.append("# right input relative to left: gain, phase at 0 Hz, delay (right later is positive)")
        elif self.kind == "level":
            lines.append("# volts RMS of a 0 dBFS sine at each input")
        for key, value in self.values.items():
            lines.append(f"{key} = {value:.9g}")
        if self.points:
            lines.append("# frequency (Hz), gain relative to the mean (dB)")
            lines += [f"point = {f:.6g} {g:.5f}" for f, g in self.points]
        return "\n".join(lines) + "\n"

    def to_json(self) -> dict[str, Any]:
        out = {k: getattr(self, k) for k in ("kind", "name", "rate_hz", "date", "device", "made_from")}
        out.update(self.values)
        if self.points:
            out["points"] = [{"frequency_hz": f, "gain_db": g} for f, g in self.points]
        return out


def parse_profile(text: str, where: str = "profile") -> Profile:
    """Read a profile from its text.

    Raises
    ------
    CaptureError
        For a line that is not ``key = value``, an unknown or repeated key, a missing header key,
        a wrong format version or kind, or a value that is not a number where one is needed.
    """
    header: dict[str, str] = {}
    values: dict[str, float] = {}
    points: list[tuple[float, float]] = []
    for number, raw in enumerate(text.splitlines(), 1):
        line = re.split(r"(?:^|\s)#", raw, maxsplit=1)[0].strip()
        if not line:
            continue
        if "=" not in line:
            raise CaptureError(f"{where}:{number}: expected 'key = value', got {raw.strip()!r}")
        key, value = (part.strip() for part in line.split("=", 1))
        if key == "point":
            parts = value.split()
            try:
                f, g = (float(v) for v in parts)
            except ValueError:
                raise CaptureError(f"{where}:{number}: 'point' needs a frequency in Hz and a gain in dB, "
                                   f"got {value!r}") from None
            points.append((f, g))
            continue
        if key in header or key in values:
            raise CaptureError(f"{where}:{number}: key '{key}' is given twice")
        if key in HEADER_KEYS:
            header[key] = value
            continue
        try:
            values[key] = float(value)
        except ValueError:
            raise CaptureError(f"{where}:{number}: '{key}' must be a number, got {value!r}") from None
    for key in ("format", "kind", "name", "rate_hz"):
        if key not in header:
            raise CaptureError(f"{where}: the header lacks '{key} = ...'")
    if header["format"] != FORMAT:
        raise CaptureError(f"{where}: format {header['format']!r} is not supported; expected {FORMAT!r}")
    kind = header["kind"]
    if kind not in KINDS:
        raise CaptureError(f"{where}: kind {kind!r} is unknown; allowed: {', '.join(KINDS)}")
    for key in values:
        if key not in VALUE_KEYS[kind] and not (kind == "level" and _LEVEL_KEY.match(key)):
            raise CaptureError(f"{where}: key '{key}' does not belong in a {kind} profile")
    if kind == "channels" and not {"gain_db", "phase_deg", "delay_s"} <= set(values):
        raise CaptureError(f"{where}: a channels profile needs gain_db, phase_deg and delay_s")
    if kind == "passband" and len(points) < 2:
        raise CaptureError(f"{where}: a passband profile needs at least two 'point = HZ DB' lines")
    freqs = sorted(f for f, _ in points)
    if any(not (np.isfinite(f) and f > 0) for f in freqs) or any(not np.isfinite(g) for _, g in points):
        raise CaptureError(f"{where}: every 'point' needs a positive frequency and a finite gain")
    if any(b == a for a, b in zip(freqs, freqs[1:])):
        twice = next(a for a, b in zip(freqs, freqs[1:]) if a == b)
        raise CaptureError(f"{where}: two 'point' lines give {twice:g} Hz; one gain per frequency")
    if kind == "level" and not values:
        raise CaptureError(f"{where}: a level profile needs channel_N_full_scale_vrms for at least one channel")
    try:
        rate = float(header["rate_hz"])
    except ValueError:
        raise CaptureError(f"{where}: rate_hz must be a number, got {header['rate_hz']!r}") from None
    return Profile(kind, header["name"], rate, header.get("date", ""), header.get("device", "unknown"),
                   header.get("made_from", ""), values, tuple(sorted(points)))


def profile_dir() -> Path:
    """Where profiles are written and looked up: ``$RTANALYZER_CALIBRATION_DIR``, else ./calibration."""
    return Path(os.environ.get(DIR_ENV) or DEFAULT_DIR)


def check_name(name: str) -> str:
    if not _NAME.match(name or ""):
        raise CaptureError(f"--name {name!r}: use letters, digits, '.', '_' and '-' only, starting with a letter "
                           "or digit")
    return name


def find_profile(name: str) -> Path:
    """The file of profile ``name``: a path to a file, or NAME.cal in :func:`profile_dir`."""
    direct = Path(name)
    if direct.suffix == SUFFIX or os.sep in name or "/" in name:
        if direct.is_file():
            return direct
        raise CaptureError(f"calibration profile {name}: no such file")
    path = profile_dir() / f"{name}{SUFFIX}"
    if path.is_file():
        return path
    known = sorted(p.stem for p in profile_dir().glob(f"*{SUFFIX}")) if profile_dir().is_dir() else []
    listing = ", ".join(known) if known else "none"
    raise CaptureError(f"calibration profile '{name}' not found in {profile_dir()}/ (profiles there: {listing})")


def load_profile(name: str) -> Profile:
    path = find_profile(name)
    try:
        text = path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise CaptureError(f"calibration profile {path}: cannot be read ({exc})") from None
    return parse_profile(text, str(path))


def write_profile(profile: Profile, directory: Path | None = None, force: bool = False) -> Path:
    """Write ``profile`` as NAME.cal; an existing file is kept unless ``force``."""
    folder = Path(directory) if directory is not None else profile_dir()
    path = folder / f"{check_name(profile.name)}{SUFFIX}"
    if path.exists() and not force:
        raise CaptureError(f"{path} exists; choose another --name or add --force to replace it")
    try:
        folder.mkdir(parents=True, exist_ok=True)
        path.write_text(profile.text(), encoding="utf-8")
    except OSError as exc:
        raise CaptureError(f"cannot write {path}: {exc.strerror or exc}") from None
    return path


def _now() -> str:
    return _dt.datetime.now().replace(microsecond=0).isoformat()


# ---- making profiles ------------------------------------------------------------------------


def make_channels_profile(signal: Signal, name: str, device: str = "unknown", made_from: str = "",
                          progress=None) -> Profile:
    """Right-versus-left gain, phase and delay from a stereo capture of one signal fed to both inputs.

    Each tone gives the right channel's gain and phase relative to the left (``dsp.quadrature``);
    the gain is their mean, and the phases are fitted by least squares with ψ(f) = φ0 - 360·f·τ
    (one tone: τ = 0 and φ0 = its phase).

    Raises
    ------
    MeasurementError
        For a mono view, no tone, or channels that differ by more than 20 degrees (the inputs were
        not fed the same signal: the message says so, naming antiphase when it is that).

    Examples
    --------
    Right input 0.2 dB hot and 0.5 degrees late at every frequency:

    >>> t = np.arange(96000) / 48000
    >>> tones = [(300, 0.3), (1000, 1.1), (2500, 2.0)]
    >>> left = sum(0.2 * np.cos(2 * np.pi * f * t + p) for f, p in tones)
    >>> right = sum(0.2 * 10 ** 0.01 * np.cos(2 * np.pi * f * t + p + np.radians(0.5)) for f, p in tones)
    >>> prof = make_channels_profile(Signal(left + 1j * right, 48000.0), "card")
    >>> [round(prof.values[k], 4) for k in ("gain_db", "phase_deg")], abs(prof.values["delay_s"]) < 1e-9
    ([0.2, 0.5], True)
    """
    result = measure_quadrature(signal, band_hz=(0.0, signal.rate_hz / 2), progress=progress)
    freqs = np.array([p.frequency_hz for p in result.points])
    psi = np.unwrap(np.radians([-p.phase_difference_deg for p in result.points]))
    gains = np.array([p.amplitude_ratio_db for p in result.points])
    # Fit first, judge after: a skew of a sample or two between the inputs is what this profile
    # exists to take out, and at 3 kHz it alone turns the phase by 20 degrees or more.
    if freqs.size >= 2:
        design = np.column_stack([np.ones_like(freqs), -2.0 * np.pi * freqs])
        (phi0, tau), *_ = np.linalg.lstsq(design, psi, rcond=None)
        residual = float(np.degrees(np.sqrt(np.mean((design @ [phi0, tau] - psi) ** 2))))
    else:
        phi0, tau, residual = float(psi[0]), 0.0, 0.0
    where = signal.source or signal.where
    offset = abs(float(np.degrees(np.angle(np.exp(1j * phi0)))))
    if offset > MAX_CHANNEL_PHASE_DEG or abs(tau) > MAX_CHANNEL_DELAY_S or residual > MAX_CHANNEL_RESIDUAL_DEG:
        if offset > 135.0:
            what = "in antiphase (one input inverted?)"
        elif abs(tau) > MAX_CHANNEL_DELAY_S:
            what = f"{abs(tau) * 1e3:.2f} ms apart in time"
        elif offset > MAX_CHANNEL_PHASE_DEG:
            what = f"{offset:.1f} degrees apart even at 0 Hz"
        else:
            what = f"not related by a gain, a phase and a delay (fit leaves {residual:.1f} degrees)"
        raise MeasurementError(
            f"{where}: the left and right inputs are {what}; a channels calibration needs one signal fed to both "
            "inputs (a Y-cable from one source)"
        )
    values = {
        "gain_db": float(np.mean(gains)),
        "phase_deg": float(np.degrees(phi0)),
        "delay_s": float(tau),
        "residual_deg": residual,
        "low_hz": float(freqs.min()),
        "high_hz": float(freqs.max()),
        "tones": float(freqs.size),
    }
    return Profile("channels", check_name(name), signal.rate_hz, _now(), device, made_from, values)


def make_passband_profile(signal: Signal, name: str, tones: Iterable[float] = (), device: str = "unknown",
                          made_from: str = "", range_db: float = 40.0, progress=None) -> Profile:
    """Receiver gain against audio frequency from a flat reference, relative to its mean level.

    The reference is the generator's multitone (all tones at once) or stepped sweep (one tone a
    step) played through the receiving path. Each tone is read by the same per-tone analysis as
    the phase network's (``measure_quadrature`` on the channel paired with itself): over every
    sample it plays in, for a sweep only the settled part of its step, so a sweep's switching
    transients never count as tones.

    Parameters
    ----------
    signal : Signal
        One real channel carrying the reference after the receiver.
    tones : iterable of float
        Audio frequencies of the tones in the capture; default: every tone found within
        ``range_db`` of the strongest.
    progress : callable, optional
        ``progress(done, total)`` after each tone.

    Raises
    ------
    MeasurementError
        For fewer than two tones, or a requested tone that is not above the noise.
    """
    if signal.is_complex:
        raise MeasurementError("calibrate passband reads one real channel (--channel N), not an I/Q view")
    x = np.asarray(signal.samples, dtype=np.float64)
    paired = dataclasses.replace(signal, samples=x + 1j * x)
    result = measure_quadrature(paired, tuple(float(t) for t in tones), band_hz=(0.0, signal.rate_hz / 2),
                                range_db=range_db, progress=progress)
    if len(result.points) < 2:
        raise MeasurementError(f"{signal.where}: a passband calibration needs at least two tones; found "
                               f"{len(result.points)}")
    freqs = np.array([p.frequency_hz for p in result.points])
    levels = np.array([p.left_dbfs for p in result.points])
    points = tuple((float(f), float(g)) for f, g in zip(freqs, levels - levels.mean()))
    return Profile("passband", check_name(name), signal.rate_hz, _now(), device, made_from, {}, points)


def make_level_profile(capture: Capture, volts_rms: float, name: str, channels: Iterable[int] = (),
                       device: str = "unknown", made_from: str = "") -> Profile:
    """Volts RMS of a 0 dBFS sine per input, from a sine of ``volts_rms`` volts fed to the inputs.

    A sine of V volts RMS read at L dBFS (the strongest tone, scalloping corrected) makes a 0 dBFS
    sine V / 10**(L/20) volts RMS (dBFS per AES17: 0 dBFS is a sine of peak full scale).

    Raises
    ------
    MeasurementError
        For a non-positive voltage, or a channel with no tone above the noise.
    """
    if not (np.isfinite(volts_rms) and volts_rms > 0):
        raise MeasurementError(f"--volts-rms {volts_rms:g}: must be a positive voltage")
    numbers = list(channels) or list(range(1, capture.channels + 1))
    values = {}
    for n in numbers:
        sig = capture.view(channel=n)
        spectrum = spectrum_of(sig)
        freqs = find_tones(spectrum, 40.0, (), sig.where)
        est = max((tone_near(spectrum, f, 1.5) for f in freqs), key=lambda e: e.power)
        values[f"channel_{n}_full_scale_vrms"] = float(volts_rms / np.sqrt(est.power))
    return Profile("level", check_name(name), capture.rate_hz, _now(), device, made_from, values)


# ---- applying profiles ----------------------------------------------------------------------


@dataclass(frozen=True)
class CalibrationSet:
    """The profiles chosen for one analysis, checked against its sample rate."""

    profiles: tuple[Profile, ...] = ()

    @classmethod
    def load(cls, names: Iterable[str], rate_hz: float, where: str = "the capture") -> CalibrationSet:
        """Load profiles by name; one whose rate differs from ``rate_hz`` is an error.

        Raises
        ------
        CaptureError
            For a missing or malformed profile, two of one kind, or a rate mismatch.
        """
        profiles = []
        for name in names:
            p = load_profile(name)
            if abs(p.rate_hz - rate_hz) > 1e-6 * rate_hz:
                raise CaptureError(
                    f"calibration '{p.name}' was made at {p.rate_hz:g} Hz but {where} is sampled at {rate_hz:g} Hz; "
                    f"make a profile at {rate_hz:g} Hz (rtanalyzer calibrate {p.kind} ...)"
                )
            if any(q.kind == p.kind for q in profiles):
                raise CaptureError(f"two {p.kind} calibrations given ('{p.name}' and another); choose one")
            profiles.append(p)
        return cls(tuple(profiles))

    @property
    def names(self) -> list[str]:
        return [p.name for p in self.profiles]

    def check(self, measurement: str, stereo: bool) -> None:
        """Say now, before any audio, when a chosen profile cannot apply to this analysis.

        Raises
        ------
        MeasurementError
            For a channels profile on a one-channel view, or a passband profile on a measurement
            that has no levels at audio frequencies to correct.
        """
        channels, passband = self._get("channels"), self._get("passband")
        if channels is not None and not stereo:
            raise MeasurementError(
                f"calibration '{channels.name}' (channels) corrects the right input against the left: it needs a "
                "stereo view (I/Q or the 90° network), not one channel"
            )
        if passband is not None and measurement not in PASSBAND_MEASUREMENTS:
            raise MeasurementError(
                f"calibration '{passband.name}' (passband) applies to {' and '.join(PASSBAND_MEASUREMENTS)} "
                f"measurements, not to {measurement}"
            )

    def _get(self, kind: str) -> Profile | None:
        return next((p for p in self.profiles if p.kind == kind), None)

    def prepare(self, signal: Signal) -> Signal:
        """The signal with the channel mismatch taken out (when a channels profile is chosen)."""
        p = self._get("channels")
        if p is None:
            return signal
        if not signal.is_complex:
            raise MeasurementError(
                f"calibration '{p.name}' (channels) corrects the right input against the left: it applies to "
                f"stereo analyses (quadrature, --iq), not to {signal.label}"
            )
        v = p.values
        fixed = correct_right_channel(signal.samples, signal.rate_hz, v["gain_db"], v["phase_deg"], v["delay_s"])
        return dataclasses.replace(signal, samples=fixed)

    def finish(self, figures: dict[str, Any], signal: Signal) -> dict[str, Any]:
        """Apply the result-level corrections (passband, level) and name every profile used."""
        out = dict(figures)
        warnings = list(out.get("warnings", []))
        passband = self._get("passband")
        if passband is not None:
            self.check(out.get("measurement"), signal.is_complex)
            gain, outside = _gain_reader(passband)
            out = PASSBAND_CORRECTIONS[out["measurement"]](out, gain)
            if outside:
                warnings.append(
                    f"passband calibration '{passband.name}' covers {passband.points[0][0]:g}-"
                    f"{passband.points[-1][0]:g} Hz; figures at {', '.join(f'{f:.0f}' for f in sorted(set(outside)))} "
                    "Hz use the nearest end's gain"
                )
        level = self._get("level")
        if level is not None:
            out = _add_volts(out, level, signal)
        out["calibration"] = self.names
        out["warnings"] = warnings
        return out


def passband_gain_db(profile: Profile, frequency_hz: float) -> tuple[float, bool]:
    """Gain of the receiver at a frequency, and whether the frequency lies inside the profile's
    points (outside, the nearest end's gain is held).

    Between points the gain in dB is a monotone cubic (PCHIP, Fritsch & Carlson 1980) in log
    frequency: a receiver's skirts are smooth curves there, which straight lines between sparse
    points cut short by tenths of a dB, and PCHIP never overshoots the points.
    """
    f = abs(float(frequency_hz))
    low, high = profile.points[0][0], profile.points[-1][0]
    x = float(np.clip(np.log(max(f, 1e-3)), np.log(low), np.log(high)))
    return float(_gain_curve(profile.points)(x)), bool(low <= f <= high)


@functools.lru_cache(maxsize=8)
def _gain_curve(points: tuple[tuple[float, float], ...]):
    """The PCHIP through a profile's points in log frequency, built once per profile (a live
    session reads it for every component of every readout)."""
    from scipy.interpolate import PchipInterpolator

    return PchipInterpolator(np.log([p[0] for p in points]), [p[1] for p in points])


def _gain_reader(profile: Profile) -> tuple[Callable[[float | None], float], list[float]]:
    """A gain(f) for the profile (0 dB for a missing frequency) and the list it notes, in place,
    every frequency outside the profile's points in, for one warning at the end."""
    outside: list[float] = []

    def gain(f: float | None) -> float:
        if f is None:
            return 0.0
        g, inside = passband_gain_db(profile, f)
        if not inside:
            outside.append(abs(f))
        return g

    return gain, outside


def _correct_sideband(out: dict[str, Any], gain: Callable[[float | None], float]) -> dict[str, Any]:
    points = []
    for p in out["points"]:
        q = dict(p)
        gw, gu = gain(p["wanted_hz"]), gain(p["unwanted_hz"])
        if q.get("wanted_dbfs") is not None:
            q["wanted_dbfs"] = round(q["wanted_dbfs"] - gw, 3)
        if q.get("unwanted_dbfs") is not None:
            q["unwanted_dbfs"] = round(q["unwanted_dbfs"] - gu, 3)
        if q.get("sideband_suppression_db") is not None:
            q["sideband_suppression_db"] = round(q["sideband_suppression_db"] - gw + gu, 3)
        q["passband_correction_db"] = round(gu - gw, 3)
        points.append(q)
    out["points"] = points
    scored = [q for q in points if q.get("sideband_suppression_db") is not None]
    if scored:
        worst = min(scored, key=lambda q: q["sideband_suppression_db"])
        out["worst_sideband_suppression_db"] = worst["sideband_suppression_db"]
        out["worst_is_lower_bound"] = not worst["unwanted_detected"]
    if out.get("band_hz") is not None:
        out["worst_in_band"] = worst_in_band(points, out["band_hz"])
    if out.get("carrier_suppression_db") is not None and scored:
        strongest = max((q for q in points if q.get("wanted_dbfs") is not None), key=lambda q: q["wanted_dbfs"],
                        default=None)
        if strongest is not None:
            gc = gain(out.get("carrier_hz"))
            gw = gain(strongest["wanted_hz"])
            out["carrier_suppression_db"] = round(out["carrier_suppression_db"] - gw + gc, 3)
            if out.get("carrier_dbfs") is not None:
                out["carrier_dbfs"] = round(out["carrier_dbfs"] - gc, 3)
    return out


def _correct_twotone(out: dict[str, Any], gain: Callable[[float | None], float]) -> dict[str, Any]:
    """Each tone and product level less the receiver's gain at its frequency; dBc (re the stronger
    tone), dB PEP (PEP = 20·log10(A1 + A2) of the tones' peak amplitudes) and the worst figures
    recomputed. A bound (product under the noise) is moved the same way and stays a bound."""
    old_ref = max(out["tone_dbfs"])
    tones = [level - gain(f) for f, level in zip(out["tone_hz"], out["tone_dbfs"])]
    ref = max(tones)
    pep = float(20.0 * np.log10(sum(10.0 ** (level / 20.0) for level in tones)))
    out["tone_dbfs"] = [round(level, 3) for level in tones]
    out["pep_dbfs"] = round(pep, 3)
    imd = []
    for o in out["imd"]:
        q = dict(o)
        top = None  # (dB PEP, is bound) of the pair's worst
        for side in ("lower", "upper"):
            f = o[f"{side}_hz"]
            if f is None:  # folded, past Nyquist or colliding: not measured, nothing to correct
                q[f"{side}_passband_correction_db"] = None
                continue
            g = gain(f)
            level = o[f"{side}_dbc"] + old_ref - g  # the product's level, or its bound, corrected
            if o[f"{side}_dbfs"] is not None:
                q[f"{side}_dbfs"] = round(o[f"{side}_dbfs"] - g, 3)
            q[f"{side}_dbc"] = round(level - ref, 3)
            q[f"{side}_db_pep"] = round(level - pep, 3)
            q[f"{side}_passband_correction_db"] = round(old_ref - g - ref, 3)  # added to its dBc
            if top is None or level - pep > top[0]:
                top = (level - pep, not o[f"{side}_detected"])
        if top is not None:
            q["worst_db_pep"], q["worst_is_bound"] = round(top[0], 3), top[1]
        imd.append(q)
    out["imd"] = imd
    scored = [q for q in imd if q.get("worst_db_pep") is not None]
    if scored:
        worst = max(scored, key=lambda q: q["worst_db_pep"])
        out["worst_imd_order"] = worst["order"]
        out["worst_imd_db_pep"] = worst["worst_db_pep"]
        out["worst_imd_is_bound"] = worst["worst_is_bound"]
    # The carrier and unwanted sidebands (present with --carrier), each at its own frequency.
    if out.get("carrier_hz") is not None and out.get("carrier_suppression_db") is not None:
        g = gain(out["carrier_hz"])
        # re the stronger corrected tone: (ref) - (carrier - g) = old figure + (ref - old_ref) + g
        out["carrier_suppression_db"] = round(out["carrier_suppression_db"] + ref - old_ref + g, 3)
        if out.get("carrier_dbfs") is not None:
            out["carrier_dbfs"] = round(out["carrier_dbfs"] - g, 3)
    corrected = []
    for u, f in zip(out.get("unwanted") or [], out["tone_hz"]):
        q = dict(u)
        gw, gu = gain(f), gain(u["unwanted_hz"])
        if q.get("unwanted_dbfs") is not None:
            q["unwanted_dbfs"] = round(q["unwanted_dbfs"] - gu, 3)
        if q.get("sideband_suppression_db") is not None:
            q["sideband_suppression_db"] = round(q["sideband_suppression_db"] - gw + gu, 3)
        corrected.append(q)
    if corrected:
        out["unwanted"] = corrected
    return out


#: The measurements whose levels at audio frequencies a passband profile corrects, and how.
PASSBAND_CORRECTIONS = {"sideband": _correct_sideband, "twotone": _correct_twotone}
PASSBAND_MEASUREMENTS = tuple(PASSBAND_CORRECTIONS)


def _add_volts(out: dict[str, Any], profile: Profile, signal: Signal) -> dict[str, Any]:
    def offset(channel: int) -> float:
        key = f"channel_{channel}_full_scale_vrms"
        if key not in profile.values:
            raise MeasurementError(f"calibration '{profile.name}' (level) has no figure for channel {channel}")
        return 20.0 * np.log10(profile.values[key])

    match = re.match(r"channel (\d+)", signal.label)
    default_channel = int(match.group(1)) if match else 1

    def convert(d: dict[str, Any]) -> dict[str, Any]:
        q = dict(d)
        for key, value in d.items():
            if key.endswith("_dbfs") and isinstance(value, (int, float)) and not isinstance(value, bool):
                channel = 2 if key.startswith("right") else (1 if key.startswith("left") else default_channel)
                q[key[: -len("_dbfs")] + "_dbv"] = round(float(value) + offset(channel), 3)
        return q

    out = convert(out)
    if isinstance(out.get("points"), list):
        out["points"] = [convert(p) if isinstance(p, dict) else p for p in out["points"]]
    return out
