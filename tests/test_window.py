"""The analysis window: its samples, its exact kernel, and its figures of merit.

Outside references: scipy.signal.windows.blackmanharris (reference implementation of the
window); a brute-force DTFT summed with numpy (definition of the transform); Heinzel, Rüdiger,
Schilling 2002, window list, entry for the 4-term Blackman-Harris "-92 dB" window (values
recalled from memory, see each check); Harris 1978, Proc. IEEE 66(1) (coefficients).
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.signal import windows

from rtanalyzer.dsp.window import BLACKMAN_HARRIS_4, cosine_sum, figures, kernel


def brute_dtft(w: np.ndarray, offset_bins: float) -> float:
    """|sum_k w[k] exp(-j 2 pi nu k / n)| / sum(w): the DTFT by its definition."""
    n = len(w)
    k = np.arange(n)
    return float(np.abs(np.sum(w * np.exp(-2j * np.pi * offset_bins * k / n))) / np.sum(w))


@pytest.mark.parametrize("n", [8, 9, 64, 1000, 1023, 4096, 32768])
def test_cosine_sum_is_scipy_periodic_blackman_harris(n):
    # Reference implementation: scipy.signal.windows.blackmanharris, DFT-even (sym=False).
    np.testing.assert_allclose(cosine_sum(n), windows.blackmanharris(n, sym=False), rtol=0, atol=1e-14)


def test_cosine_sum_refuses_tiny_windows():
    with pytest.raises(ValueError, match="at least 8"):
        cosine_sum(7)


def test_coefficients_are_harris_1978():
    # Harris 1978, Table 1, 4-term Blackman-Harris -92 dB (from memory).
    assert BLACKMAN_HARRIS_4 == (0.35875, 0.48829, 0.14128, 0.01168)


@settings(max_examples=60, deadline=None)
@given(
    n=st.integers(min_value=8, max_value=2048),
    offset=st.floats(min_value=-60.0, max_value=60.0, allow_nan=False),
)
def test_kernel_matches_brute_force_dtft(n, offset):
    # Definition of the DTFT, summed directly; only offsets inside one period (|nu| < n/2).
    offset = float(np.clip(offset, -(n / 2 - 0.5), n / 2 - 0.5))
    w = windows.blackmanharris(n, sym=False)
    assert kernel(offset, n) == pytest.approx(brute_dtft(w, offset), abs=1e-10)


def test_kernel_vectorised_matches_scalar_calls():
    nu = np.array([-7.3, -0.5, 0.0, 0.25, 3.999, 4.0, 11.5])
    np.testing.assert_allclose(kernel(nu, 4096), [float(kernel(v, 4096)) for v in nu], rtol=1e-15)


def test_kernel_at_whole_bins_is_the_coefficients():
    # Arithmetic: the DFT of a periodic cosine-sum window of n points is a0*n at bin 0,
    # a_m*n/2 at bins +/-m (m = 1..3) and exactly zero at every other bin.
    n = 1024
    a0, a1, a2, a3 = BLACKMAN_HARRIS_4
    expected = [1.0, a1 / (2 * a0), a2 / (2 * a0), a3 / (2 * a0), 0.0, 0.0, 0.0]
    np.testing.assert_allclose(kernel(np.arange(7.0), n), expected, atol=1e-12)
    np.testing.assert_allclose(kernel(-np.arange(7.0), n), expected, atol=1e-12)


def test_main_lobe_has_no_zero_before_four_bins():
    # Heinzel et al. 2002, BH92 entry: first zero at 4.00 bins (from memory).
    nu = np.linspace(0.0, 3.98, 2000)
    assert np.all(kernel(nu, 4096) > 1e-6)
    assert kernel(4.0, 4096) < 1e-12
    assert figures(4096).first_zero_bins == pytest.approx(4.0)


@pytest.mark.parametrize("n", [1024, 8192, 65536])
def test_figures_match_heinzel_2002(n):
    f = figures(n)
    # Harris 1978 / Heinzel et al. 2002: coherent gain of a cosine-sum window is a0 = 0.35875
    # (from memory; also arithmetic: sum(w)/n = a0 for the periodic window).
    assert f.coherent_gain == pytest.approx(0.35875, abs=1e-12)
    # Heinzel et al. 2002, BH92: NENBW 2.0044 bins (from memory).
    assert f.enbw_bins == pytest.approx(2.0044, abs=6e-5)
    # Heinzel et al. 2002, BH92: maximum scalloping loss (emax) 0.8256 dB (from memory).
    assert f.scalloping_db == pytest.approx(0.8256, abs=6e-4)
    # Heinzel et al. 2002, BH92: highest sidelobe -92.0 dB (from memory).
    assert f.highest_sidelobe_db == pytest.approx(-92.0, abs=0.06)


def test_figures_against_window_samples_directly():
    # Definitions (Harris 1978): CG = sum(w)/n, ENBW = n*sum(w**2)/sum(w)**2, computed here
    # from scipy's window, not from the module.
    n = 4096
    w = windows.blackmanharris(n, sym=False)
    f = figures(n)
    assert f.coherent_gain == pytest.approx(w.sum() / n, rel=1e-12)
    assert f.enbw_bins == pytest.approx(n * np.sum(w**2) / w.sum() ** 2, rel=1e-12)
    # Scalloping: loss of a tone half a bin off centre, by brute-force DTFT.
    assert f.scalloping_db == pytest.approx(-20 * np.log10(brute_dtft(w, 0.5)), abs=1e-9)


def test_highest_sidelobe_from_zero_padded_fft():
    # Independent route: a heavily zero-padded FFT of scipy's window samples its DTFT densely;
    # the largest value beyond the first zero (4 bins) is the highest sidelobe.
    n, pad = 256, 256
    w = windows.blackmanharris(n, sym=False)
    spectrum = np.abs(np.fft.rfft(w, n * pad))
    spectrum /= spectrum[0]
    nu = np.arange(len(spectrum)) / pad
    sidelobe_db = 20 * np.log10(spectrum[nu > 4.0].max())
    assert figures(n).highest_sidelobe_db == pytest.approx(sidelobe_db, abs=0.02)
