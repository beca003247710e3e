"""Phase of first-order RC all-pass sections, of chains of them, and of a pair of chains.

An audio 90-degree network is two chains of first-order all-pass sections, one feeding the I
modulator and one the Q modulator. Each section passes every frequency at unity gain and lags
by ``2·atan(ωRC)``; what matters for a phasing exciter is only the *difference* between the two
chains, which should stay close to 90 degrees across the speech band.

All functions are pure numpy and broadcast over frequency.

References
----------
First-order all-pass section H(s) = (1 - sRC) / (1 + sRC), phase -2·atan(ωRC): textbook
circuit theory. The inverting form (s - 1/RC) / (s + 1/RC) is its negative: the same phase
plus π, so a pair of chains built either way has the same phase difference.
"""

from __future__ import annotations

from typing import Iterable, Sequence

import numpy as np

Section = tuple[float, float]
"""One first-order section as the builder writes it down: (R in ohms, C in farads)."""


def section_phase_rad(freq_hz, r_ohm: float, c_farad: float) -> np.ndarray:
    """Phase of one first-order all-pass section, in radians (0 at DC, toward -π at high f).

    Parameters
    ----------
    freq_hz : array_like
        Frequencies in Hz.
    r_ohm, c_farad : float
        The section's resistor and capacitor; only their product (the time constant) matters.

    Returns
    -------
    ndarray
        ``-2·atan(2π·f·R·C)``.

    References
    ----------
    Textbook circuit theory (first-order all-pass, H(s) = (1 - sRC)/(1 + sRC)).

    Examples
    --------
    At the corner frequency 1/(2πRC) a section lags by exactly 90 degrees:

    >>> import numpy as np
    >>> r, c = 10e3, 10e-9
    >>> round(float(np.degrees(section_phase_rad(1 / (2 * np.pi * r * c), r, c))), 9)
    -90.0
    """
    omega = 2.0 * np.pi * np.asarray(freq_hz, dtype=np.float64)
    return -2.0 * np.arctan(omega * (r_ohm * c_farad))


def chain_phase_rad(freq_hz, sections: Iterable[Section]) -> np.ndarray:
    """Phase of a cascade of first-order all-pass sections (the sum of their phases), radians.

    Parameters
    ----------
    freq_hz : array_like
        Frequencies in Hz.
    sections : iterable of (R, C)
        Components of each section, ohms and farads. An empty chain has zero phase.
    """
    freq = np.asarray(freq_hz, dtype=np.float64)
    total = np.zeros(freq.shape)
    for r_ohm, c_farad in sections:
        total = total + section_phase_rad(freq, r_ohm, c_farad)
    return total


def pair_difference_rad(freq_hz, chain_i: Sequence[Section], chain_q: Sequence[Section]) -> np.ndarray:
    """Phase by which the I chain leads the Q chain, radians (ideally +π/2 in band).

    Parameters
    ----------
    freq_hz : array_like
        Frequencies in Hz.
    chain_i, chain_q : sequence of (R, C)
        The two chains of the network.

    Returns
    -------
    ndarray
        ``chain_phase(I) - chain_phase(Q)``.
    """
    return chain_phase_rad(freq_hz, chain_i) - chain_phase_rad(freq_hz, chain_q)
