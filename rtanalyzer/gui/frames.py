"""What the plots draw, made from a readout on the analysis thread (numpy and scipy only).

:class:`DisplayPrep` is handed every readout by the engine (its ``on_readout`` callback, on
the analysis thread) and turns it into a :class:`DisplayFrame`: the spectrum in dBFS in display
order (with the peak hold), the markers the measurement put on it, a few milliseconds of
waveform with its envelope, and the envelope-versus-drive points. The GUI thread only picks up
the newest frame and draws it.
"""

from __future__ import annotations

import threading
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np
from scipy.signal import hilbert

from rtanalyzer.dsp.phasors import tone_phasors, tones_envelope

#: Most points drawn in the spectrum; longer spectra keep the largest value of each group.
MAX_SPECTRUM_POINTS = 8192
#: Most points in the envelope-versus-drive pattern.
MAX_PATTERN_POINTS = 1500
#: Fraction of the window left out at each end of the envelope (the analytic signal's edges).
EDGE = 0.1
FLOOR_DB = -200.0


@dataclass(frozen=True)
class Marker:
    """A component the measurement named, where it sits and what to write beside it."""

    role: str  # "carrier", "wanted", "unwanted" (a 90° network's image too) or "imd"
    frequency_hz: float
    level_dbfs: float  # measured level, or the detection bound when not detected
    detected: bool
    label: str


@dataclass
class DisplayFrame:
    """One readout made ready to draw."""

    readout: Any
    frequencies_hz: np.ndarray | None = None
    level_dbfs: np.ndarray | None = None
    peak_dbfs: np.ndarray | None = None
    is_complex: bool = False
    rate_hz: float = 0.0
    markers: tuple[Marker, ...] = ()
    noise_floor_dbfs: float | None = None
    analysis_bandwidth_hz: float | None = None
    time_s: np.ndarray | None = None  # waveform segment, from its first sample
    waveform: np.ndarray | None = None  # (frames, 1 or 2): the channel, or I and Q
    envelope: np.ndarray | None = None
    drive: np.ndarray | None = None  # envelope of the fitted tones alone
    measured: np.ndarray | None = None  # measured envelope at the same instants
    pattern_tones_hz: tuple[float, ...] = ()
    notes: list[str] = field(default_factory=list)


def _db(x: float | None) -> str:
    return "—" if x is None else f"{x:.1f}".replace("-", "−")


def _hz(f: float) -> str:
    """A tone's frequency as a label says it: 646 Hz, a sweep's 1392.48 Hz as 1392 Hz."""
    return f"{f:.0f} Hz" if abs(f) >= 100.0 else f"{f:g} Hz"


def _signed(x: float, decimals: int = 2) -> str:
    return ("+" if x > 0 else "") + f"{x:.{decimals}f}".replace("-", "−")


def markers_of(result: dict[str, Any] | None) -> tuple[Marker, ...]:
    """The markers for a sideband, two-tone or 90° network result (positions and levels from its JSON)."""
    if not result:
        return ()
    if result.get("measurement") == "quadrature":
        return _quadrature_markers(result)
    if result.get("measurement") == "twotone" or "imd" in result:
        return _twotone_markers(result)
    return _sideband_markers(result)


def noise_sigmas() -> float:
    """How many standard deviations make a network error 'measured' (the measurement's rule)."""
    from rtanalyzer.dsp import quadrature

    return float(getattr(quadrature, "NOISE_SIGMAS", 3.0))


#: An image counts as seen on the spectrum when its level stands this far above the noise floor.
IMAGE_CLEAR_DB = 10.0


def quadrature_components(p: dict[str, Any]) -> tuple[float, float, float] | None:
    """Where a network point's tone and its image sit in the spectrum of left + j·right.

    For I = a·cos(ωt + α) and Q = b·cos(ωt + β) the complex signal I + jQ holds
    (a·e^{jα} + j·b·e^{jβ})/2 at +f and (a·e^{-jα} + j·b·e^{-jβ})/2 at -f: with Q lagging I by
    90° all of it at +f. Returns (signed frequency of the stronger, its level in dBFS, the other's
    level in dBFS), or None when the point lacks a level or a phase.
    """
    f, left, right = p.get("frequency_hz"), p.get("left_dbfs"), p.get("right_dbfs")
    diff = p.get("phase_difference_deg")
    if f is None or left is None or right is None or diff is None:
        return None
    a, b = 10.0 ** (left / 20.0), 10.0 ** (right / 20.0)
    d = np.radians(diff)
    pos = float(20.0 * np.log10(max(abs(a + b * np.exp(1j * (np.pi / 2 - d))) / 2.0, 1e-15)))
    neg = float(20.0 * np.log10(max(abs(a + b * np.exp(1j * (np.pi / 2 + d))) / 2.0, 1e-15)))
    return (f, pos, neg) if pos >= neg else (-f, neg, pos)


def _quadrature_markers(result: dict[str, Any]) -> tuple[Marker, ...]:
    """Each tone of a 90° network at the side of the spectrum it turns to, with its phase error, and
    its image at the mirror frequency (the suppression the errors allow below it). A multitone names
    only the worst point in the band (the one the suppression tile names)."""
    points = [(p, c) for p in result.get("points") or [] if (c := quadrature_components(p)) is not None]
    band = result.get("band") or {}
    named_f = band.get("worst_frequency_hz")
    if named_f is None:
        named_f = result.get("worst_frequency_hz")
    many = len(points) > 3
    floor = result.get("noise_floor_dbfs")
    markers: list[Marker] = []
    for p, (f, wanted_db, _) in points:
        named = not many or (named_f is not None and abs(p["frequency_hz"] - named_f) < 0.01)
        hidden = bool(p.get("predicted_suppression_is_bound"))
        err = p.get("phase_error_deg")
        if err is None:
            text = _hz(p["frequency_hz"])
        elif hidden:
            most = abs(err) + noise_sigmas() * (p.get("phase_uncertainty_deg") or 0.0)
            most = np.ceil(most * 100.0 - 1e-6) / 100.0  # an upper bound stays one when rounded
            text = f"{_hz(p['frequency_hz'])} · error ≤ {most:.2f}°"
        else:
            text = f"{_hz(p['frequency_hz'])} · error {_signed(err)}°"
        markers.append(Marker("wanted", f, wanted_db, True, text if named else ""))
        supp = p.get("predicted_suppression_db")
        if supp is None:
            continue
        image_db = wanted_db - supp  # for a bound: the most the image can be
        seen = not hidden and (floor is None or image_db >= floor + IMAGE_CLEAR_DB)
        if hidden:  # a lower bound stays one when rounded: down to the tenth
            text = f"image\n≥ {_db(np.floor(supp * 10.0 + 1e-6) / 10.0)} dB down"
        elif seen:
            text = f"image\n{_db(supp)} dB down"
        else:  # the errors are measured; the image they make is below what the spectrum shows
            text = f"image under the noise\npredicted {_db(supp)} dB down"
        if not seen and floor is not None:
            image_db = max(image_db, floor)  # a hollow mark on the noise: not seen, at most there
        markers.append(Marker("unwanted", -f, image_db, seen, text if named else ""))
    return tuple(markers)


def _sideband_markers(result: dict[str, Any]) -> tuple[Marker, ...]:
    points = result.get("points") or []
    markers: list[Marker] = []
    wanted_levels = [p["wanted_dbfs"] for p in points if p.get("wanted_dbfs") is not None]
    top = max(wanted_levels) if wanted_levels else None
    many = len(points) > 3  # a multitone: name only the worst pair, mark the rest
    worst = None
    if points:
        worst = min(points, key=lambda p: p.get("sideband_suppression_db") if p.get("sideband_suppression_db") is not None else np.inf)
    for p in points:
        named = not many or p is worst
        if p.get("wanted_hz") is not None and p.get("wanted_dbfs") is not None:
            text = f"wanted {p['tone_hz']:g} Hz\n{_db(p['wanted_dbfs'])} dBFS" if named else ""
            markers.append(Marker("wanted", p["wanted_hz"], p["wanted_dbfs"], True, text))
        if p.get("unwanted_hz") is None:
            continue
        supp = p.get("sideband_suppression_db")
        if p.get("unwanted_detected") and p.get("unwanted_dbfs") is not None:
            text = f"unwanted\n{_db(p['unwanted_dbfs'])} dBFS · {_db(supp)} dB" if named else ""
            markers.append(Marker("unwanted", p["unwanted_hz"], p["unwanted_dbfs"], True, text))
        elif supp is not None and p.get("wanted_dbfs") is not None:
            text = f"unwanted not seen\n≥ {_db(supp)} dB down" if named else ""
            markers.append(Marker("unwanted", p["unwanted_hz"], p["wanted_dbfs"] - supp, False, text))
    carrier_hz = result.get("carrier_hz")
    if carrier_hz is not None:
        supp = result.get("carrier_suppression_db")
        if result.get("carrier_detected") and result.get("carrier_dbfs") is not None:
            markers.append(Marker("carrier", carrier_hz, result["carrier_dbfs"], True,
                                  f"carrier\n{_db(result['carrier_dbfs'])} dBFS · {_db(supp)} dBc"))
        elif supp is not None and top is not None:
            markers.append(Marker("carrier", carrier_hz, top - supp, False, f"carrier not seen\n≥ {_db(supp)} dBc"))
    return tuple(markers)


def _twotone_markers(result: dict[str, Any]) -> tuple[Marker, ...]:
    markers: list[Marker] = []
    tones = result.get("tone_hz") or []
    levels = result.get("tone_dbfs") or []
    for i, (f, level) in enumerate(zip(tones, levels)):
        if f is not None and level is not None:
            markers.append(Marker("wanted", f, level, True, f"tone {i + 1}\n{_db(level)} dBFS"))
    pep = result.get("pep_dbfs")
    for product in result.get("imd") or []:
        order = product.get("order")
        for side in ("lower", "upper"):
            f = product.get(f"{side}_hz")
            if f is None:
                continue
            dbc = product.get(f"{side}_dbc")
            if product.get(f"{side}_detected") and product.get(f"{side}_dbfs") is not None:
                markers.append(Marker("imd", f, product[f"{side}_dbfs"], True, f"IMD{order}\n{_db(dbc)} dBc"))
            elif pep is not None and product.get(f"{side}_db_pep") is not None:
                level = pep + product[f"{side}_db_pep"]
                markers.append(Marker("imd", f, level, False, f"IMD{order}\n≤ {_db(dbc)} dBc"))
    markers += _twotone_context(result, levels)
    return tuple(markers)


def _twotone_context(result: dict[str, Any], levels: list) -> list[Marker]:
    """The carrier and the unwanted sidebands of a two-tone (known when its carrier was given)."""
    out: list[Marker] = []
    for u, level in zip(result.get("unwanted") or [], levels):
        supp = u.get("sideband_suppression_db")
        if u.get("unwanted_detected") and u.get("unwanted_dbfs") is not None:
            out.append(Marker("unwanted", u["unwanted_hz"], u["unwanted_dbfs"], True,
                              f"unwanted\n{_db(supp)} dB down"))
        elif supp is not None and level is not None:
            out.append(Marker("unwanted", u["unwanted_hz"], level - supp, False, f"unwanted\n≥ {_db(supp)} dB down"))
    if result.get("carrier_hz") is not None and result.get("carrier_suppression_db") is not None:
        supp = result["carrier_suppression_db"]
        if result.get("carrier_detected") and result.get("carrier_dbfs") is not None:
            out.append(Marker("carrier", result["carrier_hz"], result["carrier_dbfs"], True, f"carrier\n{_db(supp)} dBc"))
        elif levels:
            out.append(Marker("carrier", result["carrier_hz"], max(levels) - supp, False,
                              f"carrier not seen\n≥ {_db(supp)} dBc"))
    return out


def _passband_corrected(result: dict[str, Any]) -> bool:
    """Were the result's levels moved by a passband calibration (so they sit off the raw trace)?"""
    rows = list(result.get("points") or []) + list(result.get("imd") or [])
    return any(k.endswith("passband_correction_db") for row in rows if isinstance(row, dict) for k in row)


def _on_trace(frame, markers: tuple[Marker, ...]) -> tuple[Marker, ...]:
    """Detected markers moved onto the drawn (uncorrected) spectrum's peak near them; their labels
    keep the corrected figures, which is what the calibration is for."""
    freqs, level = frame.frequencies_hz, frame.level_dbfs
    half = 3.0 * float(np.median(np.diff(freqs))) if len(freqs) > 1 else 0.0
    out = []
    for m in markers:
        near = np.abs(freqs - m.frequency_hz) <= half
        if m.detected and near.any():
            m = replace(m, level_dbfs=float(level[near].max()))
        out.append(m)
    return tuple(out)


def pattern_tones(result: dict[str, Any] | None) -> tuple[float, ...]:
    """The fundamental tones whose envelope is the 'drive': the two tones, or the wanted ones."""
    if not result:
        return ()
    if result.get("measurement") == "quadrature":  # each tone on the side of I + jQ it turns to
        return tuple(c[0] for p in (result.get("points") or []) if (c := quadrature_components(p)) is not None)
    if "imd" in result:
        return tuple(f for f in (result.get("tone_hz") or []) if f is not None)
    return tuple(p["wanted_hz"] for p in (result.get("points") or []) if p.get("wanted_hz") is not None)


def decimate_max(freqs: np.ndarray, levels: np.ndarray, most: int) -> tuple[np.ndarray, np.ndarray]:
    """At most ``most`` points, each the largest level of its group (peaks survive)."""
    n = len(levels)
    if n <= most:
        return freqs, levels
    group = int(np.ceil(n / most))
    usable = (n // group) * group
    f = freqs[:usable].reshape(-1, group).mean(axis=1)
    v = levels[:usable].reshape(-1, group).max(axis=1)
    return f, v


def waveform_span_s(result: dict[str, Any] | None) -> float:
    """Length of waveform to show: a few beats of a two-tone envelope, else a few milliseconds."""
    if result and "imd" in result:
        tones = [f for f in (result.get("tone_hz") or []) if f is not None]
        if len(tones) == 2 and tones[0] != tones[1]:
            return float(np.clip(3.0 / abs(tones[1] - tones[0]), 0.002, 0.02))
    return 0.004


class DisplayPrep:
    """Turns readouts into display frames on the analysis thread; keeps the newest for the GUI.

    Parameters
    ----------
    channel : int
        Channel analysed (counted from 1), when not I/Q.
    iq : bool
        Channels 1 and 2 are I and Q.
    rate_hz : float
    """

    def __init__(self, channel: int, iq: bool, rate_hz: float) -> None:
        self.channel = channel
        self.iq = iq
        self.rate_hz = float(rate_hz)
        self.peak_hold = False
        self._reset_peak = threading.Event()
        self._peak: np.ndarray | None = None
        self.latest: DisplayFrame | None = None  # replaced whole (one reference: no lock needed)
        self.last_error: str | None = None

    def reset_peak(self) -> None:
        """Start the peak hold afresh at the next readout (any thread)."""
        self._reset_peak.set()

    def __call__(self, readout) -> None:
        """Engine callback: never raises (an exception would stop the analysis thread)."""
        try:
            self.latest = self.prepare(readout)
            self.last_error = None
        except Exception as exc:  # a display problem must not stop the measurements
            self.last_error = f"{type(exc).__name__}: {exc}"

    def prepare(self, readout) -> DisplayFrame:
        frame = DisplayFrame(readout=readout, rate_hz=self.rate_hz)
        result = readout.result
        spectrum = readout.spectrum
        if spectrum is not None:
            self._spectrum(frame, spectrum)
        if result is not None:
            frame.markers = markers_of(result)
            # A network's levels come from the two channels' transforms, not from this spectrum of
            # I + jQ: its dots are put on the trace's peaks (their labels keep the JSON's figures).
            if frame.level_dbfs is not None and (_passband_corrected(result)
                                                 or result.get("measurement") == "quadrature"):
                frame.markers = _on_trace(frame, frame.markers)
            frame.noise_floor_dbfs = result.get("noise_floor_dbfs")
            frame.analysis_bandwidth_hz = result.get("analysis_bandwidth_hz")
        if readout.samples is not None and len(readout.samples) >= 64:
            self._time(frame, np.asarray(readout.samples), result)
        return frame

    def _spectrum(self, frame: DisplayFrame, spectrum) -> None:
        freqs = np.asarray(spectrum.frequencies_hz, dtype=np.float64)
        power = np.asarray(spectrum.power, dtype=np.float64)
        if spectrum.is_complex:
            freqs = np.fft.fftshift(freqs)
            power = np.fft.fftshift(power)
        level = 10.0 * np.log10(np.maximum(power, 10.0 ** (FLOOR_DB / 10.0)))
        freqs, level = decimate_max(freqs, level, MAX_SPECTRUM_POINTS)
        if self._reset_peak.is_set() or self._peak is None or self._peak.shape != level.shape:
            self._reset_peak.clear()
            self._peak = level.copy()
        else:
            np.maximum(self._peak, level, out=self._peak)
        frame.frequencies_hz = freqs.astype(np.float32)
        frame.level_dbfs = level.astype(np.float32)
        frame.peak_dbfs = self._peak.astype(np.float32) if self.peak_hold else None
        frame.is_complex = bool(spectrum.is_complex)

    def _time(self, frame: DisplayFrame, samples: np.ndarray, result: dict[str, Any] | None) -> None:
        if self.iq and samples.shape[1] >= 2:
            z = samples[:, 0].astype(np.float64) + 1j * samples[:, 1].astype(np.float64)
            wave = samples[:, :2]
            analytic = z
        else:
            x = samples[:, self.channel - 1].astype(np.float64)
            wave = samples[:, self.channel - 1 : self.channel]
            analytic = hilbert(x)
            z = x
        envelope = np.abs(analytic)
        n = len(envelope)
        span = min(n // 2, max(16, int(waveform_span_s(result) * self.rate_hz)))
        start = n // 4
        frame.time_s = (np.arange(span) / self.rate_hz).astype(np.float32)
        frame.waveform = np.asarray(wave[start : start + span], dtype=np.float32)
        frame.envelope = envelope[start : start + span].astype(np.float32)
        tones = pattern_tones(result)
        if not tones:
            return
        try:
            phasors = tone_phasors(z, self.rate_hz, tones)
        except Exception as exc:  # e.g. a tone the plan put beyond Nyquist
            frame.notes.append(str(exc))
            return
        drive = tones_envelope(phasors, self.rate_hz, tones, n)
        edge = int(EDGE * n)
        keep = slice(edge, n - edge)
        step = max(1, (n - 2 * edge) // MAX_PATTERN_POINTS)
        frame.drive = drive[keep][::step].astype(np.float32)
        frame.measured = envelope[keep][::step].astype(np.float32)
        frame.pattern_tones_hz = tuple(tones)
