"""The exact figures of a bench setting, computed from the model rather than measured.

The exciter's envelope (noise-free, unquantized, after the amplifier) is periodic with the
common period T of all tones, so sampling one period on an exact grid and taking its FFT gives
every component — wanted, unwanted, carrier, intermodulation — in its own bin with no leakage.
Each is then carried to the capture: moved to its audio frequency by the receiver, scaled by
the receiver gain and by the passband's gain |H(f)| at that frequency.

In a real (mono) capture a component at a negative audio frequency folds onto |f|; the truth
lists each component on its own even when two of them land on one frequency.
"""

from __future__ import annotations

import math
from fractions import Fraction
from typing import Callable, Sequence

import numpy as np

from rtanalyzer.sources.bench.knobs import BenchError, BenchKnobs
from rtanalyzer.sources.bench.network import gain_ratio, quadrature_error_rad

MODEL_NAME = "halyard-bench-1"
MAX_PERIOD_S = 100
MAX_GRID = 1 << 22  # points per period: bounds memory (64 MiB of complex envelope)
FLOOR_DBFS = -300.0  # numerical zero, kept finite so the truth stays valid JSON
IMD_ORDERS = (3, 5, 7, 9)


def image_rejection_db(gain_ratio: float, phase_error_rad) -> np.ndarray:
    """Unwanted-sideband suppression of a quadrature modulator, dB.

    ``10·log10((1 + 2g·cos ε + g²) / (1 - 2g·cos ε + g²))``.

    Parameters
    ----------
    gain_ratio : float
        Amplitude ratio g of the two paths.
    phase_error_rad : array_like
        Departure ε from quadrature, radians.

    References
    ----------
    The image-rejection relation of quadrature (image-reject) modulators and mixers, e.g.
    B. Razavi, *RF Microelectronics*, chapter on image-reject architectures.

    Examples
    --------
    >>> round(float(image_rejection_db(1.0, np.radians(1.0))), 1)
    41.2
    """
    g = float(gain_ratio)
    cos_e = np.cos(np.asarray(phase_error_rad, dtype=np.float64))
    with np.errstate(divide="ignore"):  # perfect balance: +inf
        return 10.0 * np.log10((1.0 + 2.0 * g * cos_e + g * g) / (1.0 - 2.0 * g * cos_e + g * g))


def rational_hz(value: float) -> Fraction:
    """A frequency as the exact decimal the user typed (1000.1 -> 10001/10)."""
    return Fraction(str(float(value)))


def common_period_s(tones_hz: Sequence[float]) -> Fraction:
    """Shortest T with every tone·T a whole number.

    Raises
    ------
    BenchError
        When T would exceed 100 s (tones too finely spaced or with too many decimals).
    """
    freqs = [rational_hz(f) for f in tones_hz]
    denominator = math.lcm(*(f.denominator for f in freqs))
    numerator = math.gcd(*(int(f * denominator) for f in freqs))
    period = Fraction(denominator, numerator)
    if period > MAX_PERIOD_S:
        raise BenchError(
            f"tones_hz={[float(f) for f in tones_hz]} have no common period within {MAX_PERIOD_S} s "
            f"(it is {float(period):.6g} s); put the tones on a 0.01 Hz grid"
        )
    return period


def envelope_spectrum(envelope: Callable[[np.ndarray], np.ndarray], tones_hz: Sequence[float]):
    """Fourier coefficients of the periodic envelope over one common period.

    Parameters
    ----------
    envelope : callable
        Maps tone phases in cycles, shape (n, tones), to the complex envelope, shape (n,).
    tones_hz : sequence of float

    Returns
    -------
    coeffs : ndarray of complex
        ``coeffs[m]`` is the complex amplitude at m/T Hz (negative m wraps around).
    bins : list of int
        Bin of each tone (tone·T).
    period : Fraction
        T in seconds.
    """
    period = common_period_s(tones_hz)
    bins = [int(rational_hz(f) * period) for f in tones_hz]
    # Oversample well past the highest tone so high-order products do not alias back.
    size = 1024
    while size < 64 * max(bins) and size < MAX_GRID:
        size *= 2
    if size < 16 * max(bins):
        raise BenchError(
            f"tones_hz={[float(f) for f in tones_hz]} need {16 * max(bins)} points per common period; "
            f"use coarser tone frequencies or a shorter common period"
        )
    z = np.empty(size, dtype=np.complex128)
    step = 1 << 16
    tone_bins = np.asarray(bins, dtype=np.int64)
    for start in range(0, size, step):
        n = np.arange(start, min(start + step, size), dtype=np.int64)
        cycles = (np.outer(n, tone_bins) % size) / size  # exact grid: whole cycles per period
        z[start : start + len(n)] = envelope(cycles)
    return np.fft.fft(z) / size, bins, period


def _db(amplitude: float) -> float:
    return max(FLOOR_DBFS, 20.0 * math.log10(amplitude)) if amplitude > 0.0 else FLOOR_DBFS


def _r(x: float | None) -> float | None:
    return None if x is None else round(float(x), 6)


def exact_truth(
    knobs: BenchKnobs,
    tones_hz: Sequence[float],
    rate_hz: float,
    envelope: Callable[[np.ndarray], np.ndarray],
    rx_gain: float,
    passband_gain: Callable[[np.ndarray], np.ndarray],
) -> dict:
    """The truth dict of one bench setting (see the module docstring).

    Parameters
    ----------
    knobs : BenchKnobs
    tones_hz : sequence of float
        Audio tones, as given.
    rate_hz : float
        Sample rate of the capture.
    envelope : callable
        Exciter envelope after the amplifier (see `envelope_spectrum`).
    rx_gain : float
        Receiver gain from envelope amplitude to capture amplitude (full scale 1.0).
    passband_gain : callable
        |H(f)| of the receiver passband at capture frequencies in Hz (even in f).
    """
    coeffs, bins, period = envelope_spectrum(envelope, tones_hz)
    size = len(coeffs)
    carrier_hz = knobs.carrier_offset_hz + knobs.tuning_error_hz
    side = 1.0 if knobs.wanted_side == "above" else -1.0
    nyquist = rate_hz / 2.0

    def env_amp(m: int) -> float:
        return float(abs(coeffs[m % size]))

    def capture_amp(m: int) -> tuple[float, float]:
        """(capture frequency, capture amplitude) of envelope bin m (not folded)."""
        f_cap = carrier_hz + side * float(Fraction(m) / period)
        return f_cap, env_amp(m) * rx_gain * float(passband_gain(np.array([abs(f_cap)]))[0])

    order = np.argsort(np.asarray(tones_hz, dtype=np.float64), kind="stable")
    points, exciter_ssb, wanted_env = [], [], []
    for k in order:
        m = bins[k]
        f_w, a_w = capture_amp(m)
        f_u, a_u = capture_amp(-m)
        folded = (not knobs.iq) and f_u < 0.0
        wanted_env.append(env_amp(m))
        exciter_ssb.append(_db(env_amp(m)) - _db(env_amp(-m)))
        points.append(
            {
                "tone_hz": _r(tones_hz[k]),
                "wanted_hz": _r(abs(f_w) if not knobs.iq else f_w),
                "unwanted_hz": _r(abs(f_u) if folded else f_u),
                "wanted_dbfs": _r(_db(a_w)),
                "unwanted_dbfs": _r(_db(a_u)),
                "sideband_suppression_db": _r(_db(a_w) - _db(a_u)),
                "unwanted_folded": bool(folded),
            }
        )
    _, a_c = capture_amp(0)
    carrier_dbfs = _db(a_c)
    strongest = max(p["wanted_dbfs"] for p in points)
    errors = quadrature_error_rad(np.asarray(tones_hz, dtype=np.float64)[order], knobs)
    predicted = image_rejection_db(gain_ratio(knobs), errors)
    return {
        "model": MODEL_NAME,
        "knobs": knobs.as_dict(),
        "sample_rate_hz": float(rate_hz),
        "iq": bool(knobs.iq),
        "tones_hz": [float(f) for f in tones_hz],
        "carrier_hz": _r(carrier_hz),
        "carrier_dbfs": _r(carrier_dbfs),
        "wanted_side": knobs.wanted_side,
        "points": points,
        "carrier_suppression_db": _r(strongest - carrier_dbfs),
        "worst_sideband_suppression_db": _r(min(p["sideband_suppression_db"] for p in points)),
        "twotone": _twotone(bins, side, capture_amp, knobs.iq, nyquist) if len(bins) == 2 else None,
        "exciter": {
            "sideband_suppression_db": [_r(x) for x in exciter_ssb],
            "carrier_suppression_db": _r(_db(max(wanted_env)) - _db(env_amp(0))),
        },
        "noise_dbfs": float(knobs.noise_dbfs),
        "predicted_sideband_suppression_db": [_r(min(x, -FLOOR_DBFS)) for x in predicted],
    }


def _twotone(bins, side, capture_amp, iq: bool, nyquist: float) -> dict:
    """Two-tone block: tones and odd-order products, named by their place in the capture."""
    m_lo, m_hi = sorted(bins)
    spacing = m_hi - m_lo
    # In the capture the lower tone is m_lo when the receiver does not invert, m_hi when it does.
    low_bin, high_bin, step = (m_lo, m_hi, spacing) if side > 0 else (m_hi, m_lo, -spacing)
    f_low, a_low = capture_amp(low_bin)
    f_high, a_high = capture_amp(high_bin)
    strongest = max(_db(a_low), _db(a_high))
    pep = _db(a_low + a_high)

    def product(m: int) -> dict:
        f_cap, amp = capture_amp(m)
        if (not iq and f_cap <= 0.0) or abs(f_cap) >= nyquist:
            return {"hz": None, "dbfs": None, "dbc": None, "db_pep": None}
        level = _db(amp)
        return {"hz": _r(f_cap), "dbfs": _r(level), "dbc": _r(level - strongest), "db_pep": _r(level - pep)}

    imd = []
    for order in IMD_ORDERS:
        k = (order - 1) // 2
        lower, upper = product(low_bin - k * step), product(high_bin + k * step)
        both = [x["db_pep"] for x in (lower, upper) if x["db_pep"] is not None]
        entry = {"order": order}
        for name, part in (("lower", lower), ("upper", upper)):
            for key, value in part.items():
                entry[f"{name}_{key}"] = value
        entry["worst_db_pep"] = max(both) if both else None
        imd.append(entry)
    return {
        "tone_hz": [_r(f_low), _r(f_high)],
        "tone_dbfs": [_r(_db(a_low)), _r(_db(a_high))],
        "pep_dbfs": _r(pep),
        "imd": imd,
    }
