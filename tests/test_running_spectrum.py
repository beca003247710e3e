"""`RunningSpectrum`: one FFT per readout and a running average of the last few power spectra.

Reference: `averaged_spectrum` (dsp/spectrum.py, the offline Welch average, itself checked
against scipy in test_spectrum.py). Pushing the very segments it would take (same nfft and hop)
must give the same power to 1e-9 relative (arithmetic: the same sums in another order), the
same segment count and the same independent-equivalent count.
"""

from __future__ import annotations

import numpy as np
import pytest

from rtanalyzer.dsp.running import RunningSpectrum
from rtanalyzer.dsp.spectrum import averaged_spectrum

RATE = 48000.0
NFFT = 1024
HOP = 512  # overlap 0.5


def _signal(count: int, complex_: bool = False, seed: int = 1) -> np.ndarray:
    """Noise with a tone on top: every bin has power well above rounding."""
    n = NFFT + (count - 1) * HOP
    rng = np.random.default_rng(seed)
    t = np.arange(n) / RATE
    if complex_:
        return 0.5 * np.exp(2j * np.pi * -1234.5 * t) + 0.01 * (rng.standard_normal(n) + 1j * rng.standard_normal(n))
    return 0.5 * np.cos(2 * np.pi * 1234.5 * t) + 0.01 * rng.standard_normal(n)


def _push_all(rs: RunningSpectrum, x: np.ndarray, first: int = 0):
    count = 1 + (len(x) - NFFT) // HOP
    spectrum = None
    for i in range(first, count):
        spectrum = rs.push(x[i * HOP : i * HOP + NFFT], HOP)
    return spectrum


@pytest.mark.parametrize("complex_", [False, True], ids=["real", "iq"])
def test_matches_the_offline_average_of_the_same_segments(complex_):
    k = 6
    x = _signal(k, complex_)
    ref = averaged_spectrum(x, RATE, NFFT, overlap=0.5, workers=1)
    assert ref.segments == k
    got = _push_all(RunningSpectrum(NFFT, RATE, complex_, averages=k), x)
    assert got.is_complex == complex_ and got.nfft == NFFT and got.rate_hz == RATE
    assert got.power.shape == ref.power.shape
    np.testing.assert_allclose(got.power, ref.power, rtol=1e-9, atol=0)
    assert got.segments == ref.segments
    assert got.averages == pytest.approx(ref.averages, rel=1e-12)


def test_only_the_last_m_windows_count():
    k, m = 9, 3
    x = _signal(k, seed=2)
    got = _push_all(RunningSpectrum(NFFT, RATE, False, averages=m), x)
    # reference: the offline average of the last m segments alone
    tail = x[(k - m) * HOP :]
    ref = averaged_spectrum(tail, RATE, NFFT, overlap=0.5, workers=1)
    assert ref.segments == m
    np.testing.assert_allclose(got.power, ref.power, rtol=1e-9, atol=0)
    assert got.segments == m


def test_fewer_windows_than_averages_average_what_there_is():
    x = _signal(2, seed=3)
    got = _push_all(RunningSpectrum(NFFT, RATE, False, averages=8), x)
    ref = averaged_spectrum(x, RATE, NFFT, overlap=0.5, workers=1)
    np.testing.assert_allclose(got.power, ref.power, rtol=1e-9, atol=0)
    assert got.segments == 2


def test_single_window_without_averaging_is_the_offline_single_segment():
    x = _signal(1, seed=4)
    got = RunningSpectrum(NFFT, RATE, False).push(x)
    ref = averaged_spectrum(x, RATE, NFFT, workers=1)
    np.testing.assert_allclose(got.power, ref.power, rtol=1e-9, atol=0)
    assert got.segments == 1 and got.averages == 1.0


def test_a_sine_on_a_bin_reads_its_peak_squared():
    # Scale (spectrum.py docstring, AES17 dBFS): a sine of peak A centred on a bin reads A**2 there.
    a, k = 0.25, 64
    t = np.arange(NFFT)
    got = RunningSpectrum(NFFT, RATE, False).push(a * np.cos(2 * np.pi * k * t / NFFT))
    assert got.power[k] == pytest.approx(a * a, rel=1e-12)


def test_reset_forgets_earlier_windows():
    x = _signal(4, seed=5)
    rs = RunningSpectrum(NFFT, RATE, False, averages=4)
    _push_all(rs, x)
    rs.reset()
    y = _signal(1, seed=6)
    got = rs.push(y, HOP)
    ref = averaged_spectrum(y, RATE, NFFT, workers=1)
    np.testing.assert_allclose(got.power, ref.power, rtol=1e-9, atol=0)
    assert got.segments == 1


def test_many_pushes_stay_accurate_and_non_negative():
    # The running sum subtracts the oldest spectrum; after many pushes (more than the periodic
    # re-summation interval) it must still equal the plain average (arithmetic).
    rng = np.random.default_rng(7)
    rs = RunningSpectrum(256, RATE, False, averages=3)
    windows = [rng.standard_normal(256) * 10.0 ** rng.uniform(-3, 0) for _ in range(1003)]
    for w in windows:
        got = rs.push(w, 256)
    ref = averaged_spectrum(np.concatenate(windows[-3:]), RATE, 256, overlap=0.0, workers=1)
    np.testing.assert_allclose(got.power, ref.power, rtol=1e-9, atol=0)
    assert np.all(got.power >= 0.0)


def test_bad_arguments():
    with pytest.raises(ValueError, match="averages"):
        RunningSpectrum(NFFT, RATE, False, averages=0)
    rs = RunningSpectrum(NFFT, RATE, False)
    with pytest.raises(ValueError, match=str(NFFT)):
        rs.push(np.zeros(NFFT - 1))
