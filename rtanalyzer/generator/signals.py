"""What the generator can play: test signals as frozen descriptions, validated in one place.

Each description holds its parameters in Hz, dBFS, dB, degrees and seconds and checks them when
it is made; :meth:`check_rate` adds the checks that need the sample rate (Nyquist, whole
samples). Every failure is one :class:`GeneratorError` line naming the signal, the parameter,
the bad value and the allowed range. Levels follow AES17: 0 dBFS is a sine of peak 1.0.

================  ==============================================================================
signal            ``level_dbfs`` is
================  ==============================================================================
``Tone``          the tone's peak
``TwoTone``       the PEP: the peak of the pair's envelope, 20*log10(A_low + A_high)
``Multitone``     the peak of the waveform over its period (found numerically)
``Sweep``         the peak of the tone of every step
``Quadrature``    the peak of the louder channel
================  ==============================================================================
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from rtanalyzer.generator.errors import GeneratorError
from rtanalyzer.generator.schroeder import MAX_HARMONIC, common_spacing, schroeder_phases

#: Levels a signal may be set to, dBFS.
MIN_LEVEL_DBFS = -120.0
MAX_LEVEL_DBFS = 0.0
#: Most tones in a multitone and steps in a sweep.
MAX_TONES = 512
MAX_STEPS = 10_000
_MAX_RATIO_DB = 60.0
_MAX_AMPLITUDE_DB = 20.0
_MAX_DWELL_S = 3600.0


def _fail(owner: str, name: str, value, allowed: str) -> GeneratorError:
    return GeneratorError(f"{owner} {name} = {value!r} is out of range; allowed: {allowed}")


def _number(owner: str, name: str, value, low: float, high: float, unit: str = "",
            low_open: bool = False, high_open: bool = False) -> float:
    """``value`` as a float inside [low, high] (ends open where asked), or a GeneratorError."""
    lo_sign, hi_sign = ("<" if low_open else "<="), ("<" if high_open else "<=")
    allowed = f"{low:g} {lo_sign} {name} {hi_sign} {high:g}{' ' + unit if unit else ''}"
    if math.isinf(high):
        allowed = f"a finite {name} {'>' if low_open else '>='} {low:g}{' ' + unit if unit else ''}"
    try:
        number = float(value)
    except (TypeError, ValueError):
        raise _fail(owner, name, value, allowed) from None
    if isinstance(value, bool) or not math.isfinite(number):
        raise _fail(owner, name, value, allowed)
    if number < low or number > high or (low_open and number == low) or (high_open and number == high):
        raise _fail(owner, name, value, allowed)
    return number


def _frequency(owner: str, name: str, value) -> float:
    """A frequency above 0 Hz; the Nyquist limit is checked by ``check_rate`` once the rate is known."""
    return _number(owner, name, value, 0.0, math.inf, "Hz", low_open=True, high_open=True)


def _level(owner: str, value) -> float:
    return _number(owner, "level_dbfs", value, MIN_LEVEL_DBFS, MAX_LEVEL_DBFS, "dBFS")


def _below_nyquist(owner: str, name: str, frequency_hz: float, rate_hz: float) -> None:
    if frequency_hz >= rate_hz / 2.0:
        raise GeneratorError(
            f"{owner} {name} = {frequency_hz:g} Hz is at or above Nyquist ({rate_hz / 2.0:g} Hz at "
            f"{rate_hz:g} Hz sampling); allowed: 0 < {name} < {rate_hz / 2.0:g} Hz"
        )


def _frequency_tuple(owner: str, value, count_low: int, count_high: int) -> tuple[float, ...]:
    try:
        items = tuple(value)
    except TypeError:
        raise _fail(owner, "frequencies_hz", value, "a sequence of frequencies in Hz") from None
    if not count_low <= len(items) <= count_high:
        raise GeneratorError(
            f"{owner} frequencies_hz has {len(items)} frequencies; allowed: {count_low} to {count_high}"
        )
    return tuple(_frequency(owner, f"frequencies_hz[{i}]", f) for i, f in enumerate(items))


def _set(obj, name: str, value) -> None:
    object.__setattr__(obj, name, value)  # normalising a frozen dataclass's own field


@dataclass(frozen=True)
class Tone:
    """A single sine, ``level_dbfs`` being its peak.

    Examples
    --------
    >>> Tone(1000.0, -6.0).level_dbfs
    -6.0
    """

    frequency_hz: float
    level_dbfs: float

    def __post_init__(self) -> None:
        _set(self, "frequency_hz", _frequency("Tone", "frequency_hz", self.frequency_hz))
        _set(self, "level_dbfs", _level("Tone", self.level_dbfs))

    def check_rate(self, rate_hz: float) -> None:
        """Raise :class:`GeneratorError` if the tone cannot be sampled at ``rate_hz``."""
        _below_nyquist("Tone", "frequency_hz", self.frequency_hz, rate_hz)


@dataclass(frozen=True)
class TwoTone:
    """Two tones for an intermodulation test; ``level_dbfs`` is their PEP.

    The peak of the envelope is A_low + A_high; ``ratio_db`` = 20*log10(A_high / A_low).
    Equal tones (the default) each sit 6.02 dB below the PEP.

    Examples
    --------
    >>> a_low, a_high = TwoTone(700.0, 1900.0, 0.0).amplitudes
    >>> a_low, a_high
    (0.5, 0.5)
    """

    low_hz: float
    high_hz: float
    level_dbfs: float
    ratio_db: float = 0.0

    def __post_init__(self) -> None:
        _set(self, "low_hz", _frequency("TwoTone", "low_hz", self.low_hz))
        _set(self, "high_hz", _frequency("TwoTone", "high_hz", self.high_hz))
        if not self.low_hz < self.high_hz:
            raise GeneratorError(
                f"TwoTone high_hz = {self.high_hz:g} Hz must be above low_hz = {self.low_hz:g} Hz; "
                f"allowed: high_hz > {self.low_hz:g} Hz"
            )
        _set(self, "level_dbfs", _level("TwoTone", self.level_dbfs))
        _set(self, "ratio_db", _number("TwoTone", "ratio_db", self.ratio_db, -_MAX_RATIO_DB, _MAX_RATIO_DB, "dB"))

    @property
    def amplitudes(self) -> tuple[float, float]:
        """Peak amplitudes (low, high) of the two tones at a PEP of 1.0 (0 dBFS)."""
        r = 10.0 ** (self.ratio_db / 20.0)
        return 1.0 / (1.0 + r), r / (1.0 + r)

    def check_rate(self, rate_hz: float) -> None:
        """Raise :class:`GeneratorError` if the high tone is at or above Nyquist."""
        _below_nyquist("TwoTone", "high_hz", self.high_hz, rate_hz)


@dataclass(frozen=True)
class Multitone:
    """Equal tones with Schroeder phases (low crest factor); ``level_dbfs`` is the waveform's peak.

    Tone k of N (k = 1..N, in ascending frequency) has phase -pi*k*(k-1)/N. The frequencies must
    be whole multiples of a common spacing whose highest multiple is at most 65536 (the
    waveform's period, over which its peak is found, is 1/spacing): 1 Hz steps up to 65 kHz,
    10 Hz steps up to 655 kHz.

    References
    ----------
    .. [1] M. R. Schroeder, "Synthesis of low-peak-factor signals and binary sequences with low
       autocorrelation", IEEE Trans. Inf. Theory 16(1), 85-89, 1970.

    Examples
    --------
    >>> Multitone.spread(300.0, 3000.0, 4, -10.0, spacing="linear").frequencies_hz
    (300.0, 1200.0, 2100.0, 3000.0)
    """

    frequencies_hz: tuple[float, ...]
    level_dbfs: float

    def __post_init__(self) -> None:
        freqs = _frequency_tuple("Multitone", self.frequencies_hz, 1, MAX_TONES)
        if any(b <= a for a, b in zip(freqs, freqs[1:])):
            raise GeneratorError(
                f"Multitone frequencies_hz = {freqs!r} must be strictly increasing "
                "(distinct tones in ascending order)"
            )
        _set(self, "frequencies_hz", freqs)
        _set(self, "level_dbfs", _level("Multitone", self.level_dbfs))
        spacing = common_spacing(freqs)
        if spacing is None or int(spacing[1].max()) > MAX_HARMONIC:
            detail = "share no common spacing" if spacing is None else (
                f"share a spacing of only {spacing[0]:g} Hz (period {1.0 / spacing[0]:g} s)"
            )
            raise GeneratorError(
                f"Multitone frequencies_hz {detail}; allowed: whole multiples of a spacing of at "
                f"least {freqs[-1] / MAX_HARMONIC:.6g} Hz (e.g. round them to whole Hz)"
            )

    @property
    def phases_rad(self) -> np.ndarray:
        """Schroeder phases of the tones, radians (see :func:`schroeder_phases`)."""
        return schroeder_phases(len(self.frequencies_hz))

    @classmethod
    def spread(cls, low_hz: float, high_hz: float, count: int, level_dbfs: float,
               spacing: str = "log", grid_hz: float = 1.0) -> Multitone:
        """``count`` tones from ``low_hz`` to ``high_hz``, log or linear spacing, on a ``grid_hz`` grid.

        Each frequency is rounded to the nearest multiple of ``grid_hz`` so the waveform has a
        period (1/grid_hz at most); tones that fall together after rounding are an error.

        Raises
        ------
        GeneratorError
            For a bad band, count, spacing or grid, or tones that collide on the grid.
        """
        owner = "Multitone.spread"
        low = _frequency(owner, "low_hz", low_hz)
        high = _frequency(owner, "high_hz", high_hz)
        if not low < high:
            raise GeneratorError(f"{owner} high_hz = {high:g} Hz must be above low_hz = {low:g} Hz")
        if isinstance(count, bool) or not isinstance(count, (int, np.integer)) or not 2 <= count <= MAX_TONES:
            raise _fail(owner, "count", count, f"a whole number 2 to {MAX_TONES}")
        if spacing not in ("log", "linear"):
            raise _fail(owner, "spacing", spacing, "'log' or 'linear'")
        grid = _number(owner, "grid_hz", grid_hz, 0.0, low, "Hz (at most low_hz)", low_open=True)
        raw = np.geomspace(low, high, int(count)) if spacing == "log" else np.linspace(low, high, int(count))
        snapped = np.round(raw / grid) * grid
        if np.any(np.diff(snapped) <= 0.0):
            raise GeneratorError(
                f"{owner}: {count} tones between {low:g} and {high:g} Hz collide on the {grid:g} Hz grid; "
                f"allowed: fewer tones, a wider band or a finer grid_hz"
            )
        return cls(tuple(float(f) for f in snapped), level_dbfs)

    def check_rate(self, rate_hz: float) -> None:
        """Raise :class:`GeneratorError` if the highest tone is at or above Nyquist."""
        _below_nyquist("Multitone", "frequencies_hz[-1]", self.frequencies_hz[-1], rate_hz)


@dataclass(frozen=True)
class Sweep:
    """A stepped sweep: each frequency in turn for ``dwell_s``, the first ``settle_s`` of a step unsettled.

    The sweep repeats from the first frequency after the last. The phase runs on continuously
    from step to step (no jump in the waveform), and ``level_dbfs`` is the tone's peak.

    Examples
    --------
    >>> Sweep.log_range(100.0, 10000.0, 3, -10.0, dwell_s=0.5, settle_s=0.1).frequencies_hz
    (100.0, 1000.0, 10000.0)
    """

    frequencies_hz: tuple[float, ...]
    level_dbfs: float
    dwell_s: float
    settle_s: float

    def __post_init__(self) -> None:
        _set(self, "frequencies_hz", _frequency_tuple("Sweep", self.frequencies_hz, 1, MAX_STEPS))
        _set(self, "level_dbfs", _level("Sweep", self.level_dbfs))
        _set(self, "dwell_s", _number("Sweep", "dwell_s", self.dwell_s, 0.0, _MAX_DWELL_S, "s", low_open=True))
        _set(self, "settle_s", _number("Sweep", "settle_s", self.settle_s, 0.0, self.dwell_s,
                                       f"s (below dwell_s = {self.dwell_s:g} s)", high_open=True))

    @classmethod
    def log_range(cls, start_hz: float, stop_hz: float, steps: int, level_dbfs: float,
                  dwell_s: float = 0.5, settle_s: float = 0.1) -> Sweep:
        """``steps`` frequencies spaced evenly in log frequency from ``start_hz`` to ``stop_hz``.

        ``stop_hz`` may be below ``start_hz`` for a downward sweep.
        """
        owner = "Sweep.log_range"
        start = _frequency(owner, "start_hz", start_hz)
        stop = _frequency(owner, "stop_hz", stop_hz)
        if isinstance(steps, bool) or not isinstance(steps, (int, np.integer)) or not 1 <= steps <= MAX_STEPS:
            raise _fail(owner, "steps", steps, f"a whole number 1 to {MAX_STEPS}")
        freqs = np.geomspace(start, stop, int(steps)) if steps > 1 else np.array([start])
        return cls(tuple(float(f) for f in freqs), level_dbfs, dwell_s, settle_s)

    def check_rate(self, rate_hz: float) -> None:
        """Raise :class:`GeneratorError` for a step above Nyquist or a dwell shorter than one sample."""
        for i, f in enumerate(self.frequencies_hz):
            _below_nyquist("Sweep", f"frequencies_hz[{i}]", f, rate_hz)
        if round(self.dwell_s * rate_hz) < 1:
            raise _fail("Sweep", "dwell_s", self.dwell_s, f">= {1.0 / rate_hz:g} s (one sample at {rate_hz:g} Hz)")


@dataclass(frozen=True)
class Quadrature:
    """A stereo pair in quadrature: I = A*cos(wt) on the left, Q = A*g*sin(wt + phi) on the right.

    g = 10**(amplitude_db/20) and phi = ``phase_offset_deg``, so with no offsets Q lags I by
    exactly 90 degrees, and a positive ``phase_offset_deg`` makes the lag 90 - phi degrees (the
    phase of Q relative to I is phi - 90 degrees). ``level_dbfs`` is the peak of the louder
    channel: A = 10**(level_dbfs/20) / max(1, g).

    Examples
    --------
    >>> Quadrature(1000.0, -6.0, amplitude_db=0.5, phase_offset_deg=-1.0).phase_offset_deg
    -1.0
    """

    frequency_hz: float
    level_dbfs: float
    amplitude_db: float = 0.0
    phase_offset_deg: float = 0.0

    def __post_init__(self) -> None:
        _set(self, "frequency_hz", _frequency("Quadrature", "frequency_hz", self.frequency_hz))
        _set(self, "level_dbfs", _level("Quadrature", self.level_dbfs))
        _set(self, "amplitude_db", _number("Quadrature", "amplitude_db", self.amplitude_db,
                                           -_MAX_AMPLITUDE_DB, _MAX_AMPLITUDE_DB, "dB"))
        _set(self, "phase_offset_deg", _number("Quadrature", "phase_offset_deg", self.phase_offset_deg,
                                               -180.0, 180.0, "degrees"))

    def check_rate(self, rate_hz: float) -> None:
        """Raise :class:`GeneratorError` if the tone is at or above Nyquist."""
        _below_nyquist("Quadrature", "frequency_hz", self.frequency_hz, rate_hz)


#: Every signal the generator knows.
SIGNAL_TYPES = (Tone, TwoTone, Multitone, Sweep, Quadrature)
