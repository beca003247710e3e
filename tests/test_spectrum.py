"""The averaged spectrum's scale, checked against scipy.signal and against analytic levels.

Scale relations used below (derived here, not taken from the module):

* scipy.signal.welch(scaling='spectrum'), one-sided, gives |X_k|**2 / S**2 (S = sum(w)), doubled
  for 0 < k < n/2. A real sine of peak A on bin k has |X_k| = A*S/2, so scipy reads A**2/2 (the
  squared RMS) and ours must read A**2: ours = 2 x scipy on every bin except DC and Nyquist,
  where scipy does not double and neither may we (ours = scipy there).
* Two-sided (complex input): scipy gives |X_k|**2 / S**2; a complex tone A*exp(jwt) has
  |X_k| = A*S, so both read A**2: ours = scipy.
* scaling='density' gives the one-sided PSD 2|X_k|**2 / (fs*sum(w**2)); times the equivalent noise
  bandwidth ENBW_Hz = fs*sum(w**2)/S**2 it is the power in one bin, 2|X_k|**2/S**2. Ours is the
  level of the sine of equal power, twice that: ours = 2 x density x ENBW_Hz (real);
  ours = density x ENBW_Hz (complex, two-sided, where a complex tone's power is A**2).
"""

from __future__ import annotations

import doctest
import re

import numpy as np
import pytest
from scipy import signal

from conftest import amplitude, synth
from rtanalyzer.dsp import spectrum as spectrum_module
from rtanalyzer.dsp.spectrum import averaged_spectrum, choose_nfft
from rtanalyzer.dsp.window import RECOMMENDED_OVERLAP


def _hop(nfft: int, overlap: float) -> int:
    return max(1, int(round(nfft * (1.0 - overlap))))


def _enbw_hz(nfft: int, rate: float) -> float:
    # Definition (Harris 1978): ENBW = fs * sum(w**2) / sum(w)**2, from scipy's window.
    w = signal.windows.blackmanharris(nfft, sym=False)
    return rate * np.sum(w**2) / np.sum(w) ** 2


@pytest.mark.parametrize("rate", [8000, 48000, 96000])
@pytest.mark.parametrize("level_dbfs", [0.0, -20.0, -90.0])
def test_real_sine_on_a_bin_centre_reads_its_peak_squared(rate, level_dbfs):
    # AES17 dBFS (conventions): a sine of peak A reads 20*log10(A) dBFS. On a bin centre the
    # periodic window's transform is exactly zero at the mirror image's offset (>= 4 bins),
    # so the reading is exact.
    nfft = 4096
    k = 300
    f = k * rate / nfft
    x = synth([(f, level_dbfs, 0.7)], rate, 1.0)
    s = averaged_spectrum(x, rate, nfft)
    assert s.power[k] == pytest.approx(amplitude(level_dbfs) ** 2, rel=1e-9)
    assert int(np.argmax(s.power)) == k
    assert not s.is_complex and len(s.power) == nfft // 2 + 1


@pytest.mark.parametrize("sign", [1, -1])
def test_complex_tone_reads_its_amplitude_squared(sign):
    # Conventions (I/Q levels): a complex tone whose I and Q are each a sine of peak A reads
    # 20*log10(A) dBFS, without the 6 dB a one-sided real spectrum needs.
    rate, nfft, k = 48000, 4096, 200
    iq = synth([(sign * k * rate / nfft, -12.0, 0.3)], rate, 0.5, iq=True)
    s = averaged_spectrum(iq[:, 0] + 1j * iq[:, 1], rate, nfft)
    assert s.is_complex and len(s.power) == nfft
    assert s.power[(sign * k) % nfft] == pytest.approx(amplitude(-12.0) ** 2, rel=1e-9)
    # The other side of zero holds nothing: the complex tone has no mirror image.
    assert s.power[(-sign * k) % nfft] < 1e-20
    assert s.frequencies_hz[int(np.argmax(s.power))] == pytest.approx(sign * k * rate / nfft)


@pytest.mark.parametrize("overlap", [0.0, 0.5, RECOMMENDED_OVERLAP])
def test_real_spectrum_is_twice_scipy_welch_spectrum_scaling(overlap):
    # scipy.signal.welch as reference implementation (relation derived in the module docstring).
    rate, nfft = 48000, 2048
    rng = np.random.default_rng(7)
    x = synth([(1000.0, -6.0, 0.1), (3333.3, -40.0, 2.0)], rate, 0.4) + 0.01 * rng.standard_normal(19200)
    x += 0.05  # a DC offset, so the DC bin is checked too
    ours = averaged_spectrum(x, rate, nfft, overlap)
    hop = _hop(nfft, overlap)
    f, ref = signal.welch(
        x, rate, window="blackmanharris", nperseg=nfft, noverlap=nfft - hop,
        detrend=False, scaling="spectrum", return_onesided=True,
    )
    assert ours.segments == 1 + (len(x) - nfft) // hop
    np.testing.assert_allclose(ours.frequencies_hz, f)
    np.testing.assert_allclose(ours.power[1:-1], 2.0 * ref[1:-1], rtol=1e-9)
    np.testing.assert_allclose(ours.power[[0, -1]], ref[[0, -1]], rtol=1e-9)


def test_single_segment_matches_scipy_periodogram():
    # scipy.signal.periodogram with the periodic Blackman-Harris window is one Welch segment.
    rate, nfft = 44100, 4096
    x = np.random.default_rng(3).standard_normal(nfft) * 0.1 + 0.02
    ours = averaged_spectrum(x, rate, nfft)
    _, ref = signal.periodogram(x, rate, window="blackmanharris", detrend=False, scaling="spectrum")
    assert ours.segments == 1
    np.testing.assert_allclose(ours.power[1:-1], 2.0 * ref[1:-1], rtol=1e-9)
    np.testing.assert_allclose(ours.power[[0, -1]], ref[[0, -1]], rtol=1e-9)


def test_complex_spectrum_equals_scipy_two_sided_welch():
    # scipy.signal.welch, complex input, return_onesided=False: same FFT bin order and scale.
    rate, nfft = 48000, 2048
    iq = synth([(1500.0, -10.0, 0.0), (-700.0, -30.0, 1.0)], rate, 0.4, noise_rms=0.01, iq=True, seed=2)
    z = iq[:, 0] + 1j * iq[:, 1]
    ours = averaged_spectrum(z, rate, nfft)
    hop = _hop(nfft, RECOMMENDED_OVERLAP)
    f, ref = signal.welch(
        z, rate, window="blackmanharris", nperseg=nfft, noverlap=nfft - hop,
        detrend=False, scaling="spectrum", return_onesided=False,
    )
    np.testing.assert_allclose(ours.frequencies_hz, f)
    np.testing.assert_allclose(ours.power, ref, rtol=1e-9)


@pytest.mark.parametrize("iq", [False, True])
def test_noise_reads_as_density_times_enbw(iq):
    # scipy.signal.welch(scaling='density') x ENBW_Hz (relation in the module docstring).
    rate, nfft = 48000, 4096
    x = synth([], rate, 1.0, noise_rms=0.003, iq=iq, seed=11)
    data = x[:, 0] + 1j * x[:, 1] if iq else x
    ours = averaged_spectrum(data, rate, nfft)
    hop = _hop(nfft, RECOMMENDED_OVERLAP)
    _, density = signal.welch(
        data, rate, window="blackmanharris", nperseg=nfft, noverlap=nfft - hop,
        detrend=False, scaling="density", return_onesided=not iq,
    )
    enbw = _enbw_hz(nfft, rate)
    assert ours.enbw_hz == pytest.approx(enbw, rel=1e-12)
    expected = density * enbw * (1.0 if iq else 2.0)
    if not iq:
        expected[[0, -1]] /= 2.0  # DC and Nyquist are not doubled one-sided (scipy does the same)
    np.testing.assert_allclose(ours.power, expected, rtol=1e-9)


@pytest.mark.parametrize("iq", [False, True])
def test_white_noise_level_is_the_sine_of_equal_power_in_the_enbw(iq):
    # First principles: white noise of variance s**2 per channel has density 2*s**2/fs
    # (one-sided real, or two-sided complex with I and Q each s**2); its power in ENBW_Hz is
    # P = 2*s**2*ENBW_Hz/fs. The sine of equal power reads 2P (real: power A**2/2) or P (complex
    # tone: power A**2). The mean over thousands of averaged bins pins it to a few hundredths
    # of a dB.
    rate, sigma = 48000, 0.01
    x = synth([], rate, 2.0, noise_rms=sigma, iq=iq, seed=5)
    data = x[:, 0] + 1j * x[:, 1] if iq else x
    s = averaged_spectrum(data, rate, 4096)
    p = 2 * sigma**2 * s.enbw_hz / rate
    expected_db = 10 * np.log10(p if iq else 2 * p)
    inner = s.power[10:-10]
    assert 10 * np.log10(np.mean(inner)) == pytest.approx(expected_db, abs=0.05)


def test_equivalent_averages_without_overlap_is_the_segment_count():
    # Welch 1967: segments that do not overlap are independent for white noise.
    s = averaged_spectrum(np.random.default_rng(0).standard_normal(8192 * 5), 48000, 8192, overlap=0.0)
    assert s.segments == 5
    assert s.averages == pytest.approx(5.0)
    assert averaged_spectrum(np.ones(4096) + np.arange(4096) * 1e-3, 48000, 4096).averages == pytest.approx(1.0)


def test_equivalent_averages_predicts_the_noise_variance():
    # Welch 1967; Percival & Walden 1993, sec. 6.17: the averaged periodogram of white noise
    # has var/mean**2 = 1/K_eq. Checked on thousands of bins (adjacent bins are correlated
    # through the window, so the empirical ratio is itself only good to ~10 %).
    rate, nfft = 48000, 1024
    x = np.random.default_rng(21).standard_normal(nfft * 24)
    s = averaged_spectrum(x, rate, nfft)
    k_eq = s.averages
    assert 1.0 < k_eq < s.segments  # overlapped segments are partly dependent
    inner = s.power[8:-8]
    ratio = np.var(inner) / np.mean(inner) ** 2
    assert ratio == pytest.approx(1.0 / k_eq, rel=0.15)


def test_choose_nfft_bins_and_limits():
    # Design targets stated in the module (1 Hz bins, power of two, within the capture).
    assert choose_nfft(96000, 48000) == 65536
    assert choose_nfft(48000, 48000) == 32768
    assert choose_nfft(10**7, 8000) == 8192
    with pytest.raises(ValueError, match="too short"):
        choose_nfft(1000, 48000)


def test_bad_inputs_raise_value_error():
    with pytest.raises(ValueError, match="1-D"):
        averaged_spectrum(np.zeros((4096, 2)), 48000)
    with pytest.raises(ValueError, match="overlap"):
        averaged_spectrum(np.zeros(4096), 48000, 1024, overlap=1.0)
    with pytest.raises(ValueError, match="shorter than one segment"):
        averaged_spectrum(np.zeros(2000), 48000, 4096)


def test_docstring_example_runs_and_is_right():
    # The example must hold as written (doctest), under the numpy that is installed.
    finder = doctest.DocTestFinder()
    runner = doctest.DocTestRunner(optionflags=doctest.ELLIPSIS)
    for test in finder.find(spectrum_module.averaged_spectrum, "averaged_spectrum", globs={
        "averaged_spectrum": averaged_spectrum,
    }):
        runner.run(test)
    assert runner.failures == 0, "the averaged_spectrum docstring example fails (run python -m doctest)"


def test_docstring_example_value():
    # The example's number, worked independently: 1000 Hz at 48 kHz with 32768-point segments
    # sits 2/3 of a bin past bin 682, so the largest bin is 1/3 bin from the tone; its level is
    # 20*log10(0.5) + 20*log10(|W(1/3)|/W(0)), W the brute-force DTFT of scipy's window.
    n = 32768
    w = signal.windows.blackmanharris(n, sym=False)
    k = np.arange(n)
    loss = np.abs(np.sum(w * np.exp(-2j * np.pi * (1 / 3) * k / n))) / w.sum()
    expected = 20 * np.log10(0.5) + 20 * np.log10(loss)
    t = np.arange(48000) / 48000
    s = averaged_spectrum(0.5 * np.cos(2 * np.pi * 1000 * t), 48000)
    assert 10 * np.log10(s.power.max()) == pytest.approx(expected, abs=0.005)
    # The number the docstring shows must be that value to its two decimals.
    examples = doctest.DocTestParser().get_examples(spectrum_module.averaged_spectrum.__doc__)
    shown = float(re.search(r"-?\d+\.\d+", examples[-1].want).group())
    assert shown == round(float(expected), 2), f"docstring shows {shown} dB, the value is {expected:.2f} dB"
