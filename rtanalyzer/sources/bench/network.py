"""The audio 90-degree network of the bench, with its amplitude and phase trimmers.

The example network is our own 4 + 4 section RC all-pass pair for 300–3000 Hz. It was designed
once with ``scipy.optimize`` (Nelder-Mead on the Lp norm of the phase error, p raised to 128,
i.e. close to equiripple); the optimum time constants give ±0.005 degrees, with corner
frequencies 225, 735, 2090, 12871 Hz (I chain) and 70, 431, 1224, 3997 Hz (Q chain). A builder
then takes 10 nF capacitors throughout and the nearest E24 resistors, which is what is
hard-coded below. Those rounded values give, over 300–3000 Hz:

- phase difference 88.94 … 89.81 degrees (error -1.06 … -0.19 degrees, mean -0.75 degrees),
  worst near 670 Hz;
- network-alone sideband suppression 40.7 dB at worst (670 Hz) and 55 dB at best (3 kHz),
  from the image-rejection relation with equal gains;
- outside the band it falls away: -1.35 degrees at 200 Hz, -12.4 degrees at 100 Hz.

The phase trimmer can take out the mean error but not the ripple, so after a perfect trim the
demo rig still shows about 48 dB at worst in band: what a real phasing rig of this kind does.

Tones are steady, so each path is applied as its exact analog frequency response at each tone
(no digital filter, no start-up transient, no bilinear warping).
"""

from __future__ import annotations

import numpy as np

from rtanalyzer.dsp.allpass import Section, chain_phase_rad
from rtanalyzer.sources.bench.knobs import BenchKnobs

_C = 10e-9  # farads: one value throughout, as a builder would buy a matched strip
EXAMPLE_I_CHAIN: tuple[Section, ...] = ((1_200.0, _C), (7_500.0, _C), (22_000.0, _C), (68_000.0, _C))
EXAMPLE_Q_CHAIN: tuple[Section, ...] = ((3_900.0, _C), (13_000.0, _C), (36_000.0, _C), (220_000.0, _C))


def network_phases_rad(freq_hz, network: str) -> tuple[np.ndarray, np.ndarray]:
    """Phase of the I and Q paths of the untrimmed network at ``freq_hz``, radians.

    ``"ideal"`` gives I at 0 and Q lagging by exactly π/2 at every frequency.
    """
    freq = np.asarray(freq_hz, dtype=np.float64)
    if network == "ideal":
        return np.zeros(freq.shape), np.full(freq.shape, -np.pi / 2)
    return chain_phase_rad(freq, EXAMPLE_I_CHAIN), chain_phase_rad(freq, EXAMPLE_Q_CHAIN)


def path_responses(freq_hz, knobs: BenchKnobs) -> tuple[np.ndarray, np.ndarray]:
    """Complex response of the I and Q audio paths at ``freq_hz``, trimmers included.

    Returns
    -------
    h_i, h_q : ndarray of complex
        ``h_i = exp(jφ_I)``; ``h_q = g·exp(j(φ_Q + trim))`` with g from ``amplitude_trim_db``.
    """
    phase_i, phase_q = network_phases_rad(freq_hz, knobs.network)
    gain = gain_ratio(knobs)
    trim = np.radians(knobs.phase_trim_deg)
    return np.exp(1j * phase_i), gain * np.exp(1j * (phase_q + trim))


def gain_ratio(knobs: BenchKnobs) -> float:
    """Amplitude ratio g of the Q path to the I path (the all-pass chains have unit gain)."""
    return float(10.0 ** (knobs.amplitude_trim_db / 20.0))


def quadrature_error_rad(freq_hz, knobs: BenchKnobs) -> np.ndarray:
    """Total phase error ε at each tone that the image-rejection relation sees, radians.

    ``(φ_I - φ_Q - 90°) + lo_quadrature_error - phase_trim``: the network's departure from
    quadrature, plus the carrier drives', less the trimmer's correction. With z = I + jQ·e^{jε},
    an audio phase δ on Q turns the unwanted term into 1 - g·e^{j(ε-δ)}, hence the signs.
    """
    phase_i, phase_q = network_phases_rad(freq_hz, knobs.network)
    network_error = phase_i - phase_q - np.pi / 2
    return network_error + np.radians(knobs.lo_quadrature_error_deg - knobs.phase_trim_deg)
