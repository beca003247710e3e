"""Frequency plan of a capture: where carrier, wanted and unwanted components land, and the lock.

The user gives the modulating tones, optionally the carrier offset (where the suppressed
carrier lands in the audio) and the wanted side. The receiver is never tuned exactly, so the
wanted component is searched for within +/-50 Hz of its nominal place; once the strongest one
is locked, every other component is placed by the exact spacing (wanted - carrier = carrier -
unwanted = tone), which holds whatever the tuning error.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from rtanalyzer.dsp.noise import MAIN_LOBE_BINS, local_noise
from rtanalyzer.dsp.spectrum import Spectrum
from rtanalyzer.dsp.tones import ToneEstimate, local_peaks, locate_tone, refine_peak
from rtanalyzer.errors import PlanError
from rtanalyzer.measurements.hum import is_hum, mains_line

SEARCH_HZ = 50.0
# Below this a real capture holds DC and mains hum, not test tones.
LOW_EDGE_HZ = 70.0
WANTED_CHOICES = ("above", "below", "auto")


@dataclass(frozen=True)
class PlanRequest:
    """What the user said: tones (Hz), carrier offset (Hz, or None), wanted side."""

    tones_hz: tuple[float, ...]
    carrier_hz: float | None = None
    wanted: str = "auto"
    residues: bool = True  # measure carrier and unwanted too (False: only the wanted tones)

    def __post_init__(self) -> None:
        if not self.tones_hz:
            raise PlanError("give at least one modulating tone (--tone HZ)")
        for f in self.tones_hz:
            if not np.isfinite(f) or f <= 0:
                raise PlanError(f"tone {f:g} Hz: a modulating tone must be a positive frequency")
        if len(set(self.tones_hz)) != len(self.tones_hz):
            raise PlanError(f"tones {list(self.tones_hz)}: each tone may be given once")
        if self.carrier_hz is not None and not np.isfinite(self.carrier_hz):
            raise PlanError(f"carrier {self.carrier_hz}: must be a finite frequency in Hz")
        if self.wanted not in WANTED_CHOICES:
            raise PlanError(f"wanted side '{self.wanted}': choose one of {', '.join(WANTED_CHOICES)}")


@dataclass(frozen=True)
class Lock:
    """A plan locked onto a capture: the carrier where it really landed, and the wanted side."""

    carrier_hz: float
    side: int  # +1: wanted above the carrier, -1: below
    tones_hz: tuple[float, ...]
    tuning_offset_hz: float | None  # found minus given carrier; None when no carrier was given
    residues: bool = True

    def wanted_hz(self, tone: float) -> float:
        return self.carrier_hz + self.side * tone

    def unwanted_hz(self, tone: float) -> float:
        return self.carrier_hz - self.side * tone

    @property
    def wanted_side(self) -> str:
        return "above" if self.side > 0 else "below"

    def positions(self) -> dict[str, float]:
        """The components to be measured, by name, for range and collision checks."""
        named = {"carrier": self.carrier_hz} if self.residues else {}
        for t in self.tones_hz:
            named[f"wanted sideband of the {t:g} Hz tone"] = self.wanted_hz(t)
            if self.residues:
                named[f"unwanted sideband of the {t:g} Hz tone"] = self.unwanted_hz(t)
        return named


def guard_hz(spectrum: Spectrum) -> float:
    """How close to DC or Nyquist (real) a component may sit, and how close two may come."""
    return 2 * MAIN_LOBE_BINS * spectrum.bin_hz


def out_of_range(spectrum: Spectrum, frequency_hz: float) -> str | None:
    """Why a component at this frequency cannot be measured, or None if it can."""
    g = guard_hz(spectrum)
    if spectrum.is_complex:
        if abs(frequency_hz) > spectrum.nyquist_hz - g:
            return f"lies beyond the Nyquist frequency (+/-{spectrum.nyquist_hz:g} Hz) of the I/Q capture"
        return None
    if frequency_hz < 0:
        return f"lies below 0 Hz and folds onto {abs(frequency_hz):.1f} Hz in a real capture (use --iq or a higher carrier)"
    if frequency_hz < g:
        return f"lies within {g:.1f} Hz of 0 Hz, where a real capture cannot separate it from DC"
    if frequency_hz > spectrum.nyquist_hz - g:
        return f"lies beyond the Nyquist frequency ({spectrum.nyquist_hz:g} Hz) of the capture"
    return None


def check_positions(spectrum: Spectrum, named: dict[str, float]) -> None:
    """Raise PlanError for a component out of range, or two closer than the resolution."""
    for name, f in named.items():
        why = out_of_range(spectrum, f)
        if why:
            raise PlanError(f"the {name} would land at {f:g} Hz, which {why}")
    items = list(named.items())
    g = guard_hz(spectrum)
    for i, (a, fa) in enumerate(items):
        for b, fb in items[i + 1 :]:
            if abs(fa - fb) < g:
                raise PlanError(
                    f"the {a} ({fa:g} Hz) and the {b} ({fb:g} Hz) collide: they are closer than the "
                    f"{g:.1f} Hz this capture resolves; change the carrier offset or the tones"
                )


def _search(spectrum: Spectrum, nominal_hz: float, half_hz: float) -> ToneEstimate | None:
    if out_of_range(spectrum, nominal_hz):
        return None
    lo, hi = nominal_hz - half_hz, nominal_hz + half_hz
    if not spectrum.is_complex:
        lo = max(lo, guard_hz(spectrum))
        hi = min(hi, spectrum.nyquist_hz - guard_hz(spectrum))
    return locate_tone(spectrum, lo, hi)


def _search_half_width(request: PlanRequest) -> float:
    """+/-50 Hz, narrowed so a search never reaches a neighbouring tone's place."""
    tones = sorted(request.tones_hz)
    gaps = [b - a for a, b in zip(tones, tones[1:])] + tones
    return min(SEARCH_HZ, 0.45 * min(gaps))


def _detected(spectrum: Spectrum, tone: ToneEstimate | None, exclude: tuple[float, ...] = ()) -> bool:
    if tone is None:
        return False
    noise = local_noise(spectrum, tone.frequency_hz, exclude)
    return tone.level_dbfs > noise.detection_dbfs


def _sides(request: PlanRequest) -> tuple[int, ...]:
    return {"above": (1,), "below": (-1,), "auto": (1, -1)}[request.wanted]


def _plan_problem(spectrum: Spectrum, request: PlanRequest, side: int) -> PlanError | None:
    """Why the nominal plan on this side cannot be measured, or None."""
    try:
        check_positions(spectrum, Lock(request.carrier_hz, side, request.tones_hz, 0.0, request.residues).positions())
    except PlanError as exc:
        return exc
    return None


def lock_with_carrier(spectrum: Spectrum, request: PlanRequest) -> Lock:
    """Lock when the carrier offset is given: search each side's wanted places, keep the stronger."""
    if not spectrum.is_complex and request.carrier_hz <= 0:
        raise PlanError(
            f"--carrier {request.carrier_hz:g}: in a one-channel capture the carrier lands at a positive audio "
            "frequency (where the receiver puts it, e.g. --carrier 4000); a negative one needs an I/Q capture (--iq)"
        )
    half = _search_half_width(request)
    usable = tuple(s for s in _sides(request) if _plan_problem(spectrum, request, s) is None)
    if not usable:
        raise _plan_problem(spectrum, request, _sides(request)[0])
    best: tuple[float, int, float, ToneEstimate] | None = None
    for side in usable:
        for tone in request.tones_hz:
            nominal = request.carrier_hz + side * tone
            found = _search(spectrum, nominal, half)
            if found is not None and (best is None or found.power > best[3].power):
                best = (nominal, side, tone, found)
    if best is None or not _detected(spectrum, best[3]):
        where = ", ".join(
            f"{request.carrier_hz + s * t:g} Hz" for s in usable for t in request.tones_hz
        )
        raise PlanError(
            f"no tone stands above the noise within +/-{half:g} Hz of {where}: check --carrier, "
            f"--tone and that the exciter is driven ({strongest_text(spectrum)})"
        )
    nominal, side, _, found = best
    offset = found.frequency_hz - nominal
    return Lock(request.carrier_hz + offset, side, tuple(request.tones_hz), offset, request.residues)


def strongest_text(spectrum: Spectrum, count: int = 3) -> str:
    """The strongest peaks of the capture in words, for an error that says a tone was not found."""
    edge = guard_hz(spectrum)
    lo = -spectrum.nyquist_hz + edge if spectrum.is_complex else edge
    peaks = local_peaks(spectrum, lo, spectrum.nyquist_hz - edge)[:count]
    if not len(peaks):
        return "the capture holds no peak at all"
    found = [refine_peak(spectrum, int(k)) for k in peaks]
    return "strongest peaks: " + ", ".join(
        f"{t.frequency_hz:.1f} Hz ({10 * np.log10(max(t.power, 1e-30)):.1f} dBFS)" for t in found)


def strongest_tone(spectrum: Spectrum) -> ToneEstimate:
    """The strongest tone in the capture, leaving out DC and mains hum."""
    g = max(guard_hz(spectrum), LOW_EDGE_HZ)
    edge = spectrum.nyquist_hz - guard_hz(spectrum)
    mains = mains_line(spectrum)
    ranges = [(g, edge), (-edge, -g)] if spectrum.is_complex else [(g, edge)]
    best = None
    for lo, hi in ranges:
        for k in local_peaks(spectrum, lo, hi):
            found = refine_peak(spectrum, int(k))
            if not is_hum(found.frequency_hz, mains, spectrum):
                if best is None or found.power > best.power:
                    best = found
                break  # peaks come strongest first
    if best is None:
        raise PlanError("the capture has no tone outside DC and mains hum")
    if not _detected(spectrum, best):
        raise PlanError("no tone stands above the noise anywhere in the capture")
    return best


def lock_without_carrier(spectrum: Spectrum, request: PlanRequest) -> Lock:
    """Take the strongest tone as a wanted component; keep the hypotheses the capture supports.

    A hypothesis (which tone it is, which side) must put every component in range, keep them
    apart, and find the other wanted tones. When more than one survives and the carrier and
    unwanted residues do not single one out, stop and ask for --carrier rather than guess.
    """
    strongest = strongest_tone(spectrum)
    sides = _sides(request)
    legal: list[Lock] = []
    for side in sides:
        for tone in request.tones_hz:
            lock = Lock(strongest.frequency_hz - side * tone, side, tuple(request.tones_hz), None, request.residues)
            try:
                check_positions(spectrum, lock.positions())
            except PlanError:
                continue
            others = [lock.wanted_hz(t) for t in request.tones_hz if t != tone]
            if all(_detected(spectrum, _search(spectrum, f, 1.5 * spectrum.bin_hz)) for f in others):
                legal.append(lock)
    if not legal:
        raise PlanError(
            f"the strongest tone ({strongest.frequency_hz:.1f} Hz) fits no plan with tones "
            f"{', '.join(f'{t:g}' for t in request.tones_hz)} Hz that stays in range: give --carrier"
        )
    if len(legal) == 1:
        return legal[0]
    evidence = [lk for lk in legal if _has_residue(spectrum, lk)]
    if len(evidence) == 1:
        return evidence[0]
    places = " or ".join(f"{lk.carrier_hz:.1f} Hz" for lk in legal[:4])
    raise PlanError(
        f"the carrier could be at {places}: both sides are plausible, so give --carrier HZ "
        "(and --wanted above|below) rather than let the analyzer guess"
    )


def _has_residue(spectrum: Spectrum, lock: Lock) -> bool:
    """Does a carrier or unwanted residue show where this hypothesis puts them?"""
    exclude = tuple(lock.positions().values())
    places = [lock.carrier_hz] + [lock.unwanted_hz(t) for t in lock.tones_hz]
    return any(
        _detected(spectrum, _search(spectrum, f, 1.5 * spectrum.bin_hz), exclude) for f in places
    )


def lock(spectrum: Spectrum, request: PlanRequest) -> Lock:
    """Lock the plan onto the capture and check that every component can be measured."""
    found = lock_with_carrier(spectrum, request) if request.carrier_hz is not None else lock_without_carrier(
        spectrum, request
    )
    check_positions(spectrum, found.positions())
    return found
