"""Low-crest-factor multitone: Schroeder phases and the exact peak of the periodic waveform.

A sum of N equal cosines in phase peaks at N times one tone's amplitude while its RMS is only
sqrt(N/2) times it: crest factor sqrt(2N). Schroeder's quadratic phase law spreads the peaks of
the components over the period, which brings the crest factor of N equally spaced tones down to
about 1.7 whatever N is.

The generator scales a multitone by the peak of its continuous waveform over one period, so
that neither the samples nor the signal a converter rebuilds between them exceed the level:
:func:`periodic_peak` finds that peak on a dense grid (one inverse FFT) and refines the best
candidates with Newton's method on the analytic waveform.

References
----------
.. [1] M. R. Schroeder, "Synthesis of low-peak-factor signals and binary sequences with low
   autocorrelation", IEEE Trans. Inf. Theory 16(1), 85-89, 1970.
"""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np

#: Highest harmonic of the common spacing a multitone may use; keeps the peak search small
#: (the dense grid holds 32 points per period of the highest tone).
MAX_HARMONIC = 2**16

# How closely a frequency must equal a fraction with a small denominator to count as that fraction.
_MAX_DENOMINATOR = 1000
_RELATIVE_TOLERANCE = 1e-12


def schroeder_phases(count: int) -> np.ndarray:
    """Schroeder's phases for ``count`` equal-amplitude tones.

    Parameters
    ----------
    count : int
        Number of tones N, at least 1.

    Returns
    -------
    ndarray
        phi_k = -pi * k * (k - 1) / N for k = 1..N, in radians, wrapped to [-pi, pi).

    References
    ----------
    Schroeder 1970 [1]_, the phase law for a flat power spectrum.

    Examples
    --------
    >>> np.round(schroeder_phases(4), 4).tolist()
    [0.0, -1.5708, 1.5708, -3.1416]
    """
    k = np.arange(1, int(count) + 1, dtype=np.float64)
    phases = -np.pi * k * (k - 1.0) / float(count)
    return (phases + np.pi) % (2.0 * np.pi) - np.pi


def _as_fraction(value: float) -> Fraction | None:
    frac = Fraction(value).limit_denominator(_MAX_DENOMINATOR)
    if abs(float(frac) - value) > _RELATIVE_TOLERANCE * abs(value):
        return None
    return frac


def common_spacing(frequencies_hz) -> tuple[float, np.ndarray] | None:
    """Largest spacing f0 of which every frequency is a whole multiple, and those multiples.

    Parameters
    ----------
    frequencies_hz : sequence of float
        Positive frequencies in Hz.

    Returns
    -------
    (float, ndarray of int) or None
        ``(f0, m)`` with ``frequencies_hz[i] == m[i] * f0`` (to 1e-12 relative), so the
        waveform repeats every 1/f0 seconds; None when the frequencies share no spacing that
        is a fraction with denominator up to 1000 (e.g. 1000 and 1000*sqrt(2) Hz).

    Examples
    --------
    >>> f0, m = common_spacing([700.0, 1900.0])
    >>> f0, m.tolist()
    (100.0, [7, 19])
    """
    fractions = [_as_fraction(float(f)) for f in frequencies_hz]
    if any(f is None for f in fractions):
        return None
    denominator = math.lcm(*(f.denominator for f in fractions))
    numerators = [f.numerator * (denominator // f.denominator) for f in fractions]
    divisor = math.gcd(*numerators)
    spacing = Fraction(divisor, denominator)
    return float(spacing), np.array([n // divisor for n in numerators], dtype=np.int64)


def _waveform_derivatives(s: np.ndarray, harmonics, amplitudes, phases):
    """x(s), x'(s), x''(s) of sum a*cos(2*pi*m*s + phi) at positions ``s`` (periods)."""
    w = 2.0 * np.pi * harmonics.astype(np.float64)
    arg = np.outer(s, w) + phases
    c, sn = np.cos(arg), np.sin(arg)
    return c @ amplitudes, -(sn @ (amplitudes * w)), -(c @ (amplitudes * w * w))


def periodic_peak(harmonics, amplitudes, phases) -> float:
    """Peak |x| of x(s) = sum a_k cos(2*pi*m_k*s + phi_k) over one period (continuous s).

    Parameters
    ----------
    harmonics : array_like of int
        Harmonic numbers m_k >= 1 of the common spacing, at most :data:`MAX_HARMONIC`.
    amplitudes, phases : array_like
        Amplitudes a_k >= 0 and phases phi_k in radians.

    Returns
    -------
    float
        The supremum of |x| to about 1e-13 relative.

    Notes
    -----
    x is evaluated on L >= 32 * max(m) points per period by an inverse real FFT. Between grid
    points (spacing h = 1/L) the waveform cannot rise above a grid value by more than
    h**2/8 * max|x''|, with max|x''| <= sum a_k (2 pi m_k)**2; every local maximum of |x| on
    the grid within that margin of the best one is refined by Newton's method, steps limited to
    one grid spacing.

    Examples
    --------
    Two equal tones in phase peak at the sum of their amplitudes:

    >>> round(periodic_peak([7, 19], [0.5, 0.5], [0.0, 0.0]), 12)
    1.0
    """
    m = np.asarray(harmonics, dtype=np.int64)
    a = np.asarray(amplitudes, dtype=np.float64)
    phi = np.asarray(phases, dtype=np.float64)
    length = 1 << int(math.ceil(math.log2(32 * int(m.max()))))
    spectrum = np.zeros(length // 2 + 1, dtype=np.complex128)
    np.add.at(spectrum, m, a * np.exp(1j * phi) * (length / 2.0))
    grid = np.abs(np.fft.irfft(spectrum, n=length))
    best = float(grid.max())
    margin = (1.0 / length) ** 2 / 8.0 * float(np.sum(a * (2.0 * np.pi * m) ** 2))
    local_max = (grid >= np.roll(grid, 1)) & (grid >= np.roll(grid, -1)) & (grid >= best - margin)
    index = np.flatnonzero(local_max)
    h = 1.0 / length
    peak = best
    for chunk in np.array_split(index, max(1, len(index) // 256)):
        peak = max(peak, _refine(chunk * h, h, m, a, phi))
    return peak


def _refine(s: np.ndarray, h: float, m, a, phi) -> float:
    """Newton's method towards the local maxima of |x| next to grid positions ``s``."""
    x0, _, _ = _waveform_derivatives(s, m, a, phi)
    sign = np.where(x0 >= 0.0, 1.0, -1.0)
    start = s.copy()
    for _ in range(20):
        _, d1, d2 = _waveform_derivatives(s, m, a, phi)
        y1, y2 = sign * d1, sign * d2
        concave = y2 < 0.0
        step = np.where(concave, -y1 / np.where(concave, y2, -1.0), 0.0)
        s = np.clip(s + np.clip(step, -h, h), start - h, start + h)
        if np.all(np.abs(step) < 1e-15):
            break
    x, _, _ = _waveform_derivatives(s, m, a, phi)
    return float(np.max(np.abs(x)))
