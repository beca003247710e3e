"""Tone location and level (sub-bin), the local noise floor and its detection threshold.

Targets: level error <= 0.1 dB and frequency error <= 0.5 Hz for a tone with noise at least
40 dB below it per bin (the project's issue); 0 dBFS is a sine of peak 1.0 (AES17 dBFS, as in
the conventions). Noise statistics: an averaged periodogram bin of white noise is gamma
distributed with shape K (chi-squared with 2K degrees of freedom; Welch 1967); for K = 1 it is
exponential, whose median is ln 2 times the mean (arithmetic).
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from conftest import sigma_for_bin_level, synth
from rtanalyzer.dsp.clipping import clipped_channels
from rtanalyzer.dsp.noise import local_noise, median_to_mean, threshold_db
from rtanalyzer.dsp.spectrum import averaged_spectrum
from rtanalyzer.dsp.tones import locate_tone, tone_near

RATES = (8000, 44100, 48000, 96000)

tone_cases = st.fixed_dictionaries(
    {
        "rate": st.sampled_from(RATES),
        "fraction": st.floats(0.01, 0.45),  # of the sample rate: anywhere, on or between bins
        "phase": st.floats(0.0, 2 * np.pi),
        "level": st.floats(-60.0, 0.0),
        "seed": st.integers(0, 2**31 - 1),
    }
)


@settings(max_examples=40, deadline=None)
@given(case=tone_cases)
def test_tone_level_and_frequency_exact_without_noise(case):
    # Without noise the only error is the estimator's own (interpolation on the exact kernel):
    # it must be far inside the issue's targets. Default segment length, as the measurements use.
    rate = case["rate"]
    f = case["fraction"] * rate
    x = synth([(f, case["level"], case["phase"])], rate, 1.5)
    s = averaged_spectrum(x, rate)
    t = locate_tone(s, f - 10 * s.bin_hz, f + 10 * s.bin_hz)
    assert t.level_dbfs == pytest.approx(case["level"], abs=0.01)
    assert t.frequency_hz == pytest.approx(f, abs=0.01 * s.bin_hz)
    assert t.amplitude == pytest.approx(10 ** (case["level"] / 20), rel=2e-3)


@settings(max_examples=40, deadline=None)
@given(case=tone_cases)
def test_tone_within_issue_targets_with_noise_40_db_below_per_bin(case):
    # Issue targets: <= 0.1 dB and <= 0.5 Hz with noise 40 dB below the tone per bin.
    # Statistics (Rife & Boorstyn 1974 / Kay vol. 1 bound, used to size the test, not as an
    # oracle): at 40 dB per bin the amplitude error of even an ideal estimator has a standard
    # deviation of about 0.04-0.07 dB from ONE segment, so 0.1 dB would be only a ~2-sigma
    # bound. The check therefore averages >= 25 segments (2 s, nfft = capture/8), where the
    # noise-induced error is a few hundredths of a dB and a 0.1 dB miss means a real bias.
    rate = case["rate"]
    f = case["fraction"] * rate
    seconds = 2.0
    nfft = 2 ** int(np.floor(np.log2(rate * seconds / 8)))
    sigma = sigma_for_bin_level(case["level"] - 40.0, nfft)
    x = synth([(f, case["level"], case["phase"])], rate, seconds, noise_rms=sigma, seed=case["seed"])
    s = averaged_spectrum(x, rate, nfft)
    assert s.segments >= 25
    t = locate_tone(s, f - 4 * s.bin_hz, f + 4 * s.bin_hz)
    assert abs(t.level_dbfs - case["level"]) <= 0.1
    assert abs(t.frequency_hz - f) <= 0.5


@pytest.mark.parametrize("iq_sign", [1, -1])
def test_complex_tone_located_at_its_signed_frequency(iq_sign):
    # Conventions (I/Q): a complex tone with I and Q each of peak A reads 20*log10(A) dBFS.
    rate = 48000
    f = iq_sign * 1234.56
    iq = synth([(f, -20.0, 0.4)], rate, 1.0, iq=True)
    s = averaged_spectrum(iq[:, 0] + 1j * iq[:, 1], rate)
    t = tone_near(s, f, 1.5)
    assert t.frequency_hz == pytest.approx(f, abs=0.01)
    assert t.level_dbfs == pytest.approx(-20.0, abs=0.01)


def test_tone_near_finds_an_offset_tone_and_ignores_a_stronger_neighbour():
    rate = 48000
    x = synth([(1000.7, -30.0, 0.0), (1100.0, 0.0, 1.0)], rate, 1.0)
    s = averaged_spectrum(x, rate)
    t = tone_near(s, 1000.0, 1.5)  # 0.7 Hz off, within 1.5 bins of 1.46 Hz
    assert t.frequency_hz == pytest.approx(1000.7, abs=0.01)
    assert t.level_dbfs == pytest.approx(-30.0, abs=0.01)


def test_locate_tone_is_not_fooled_by_a_strong_tone_just_outside_the_range():
    # locate_tone promises the strongest tone (a local maximum: peak_bin's docstring) in the
    # range. A 0 dBFS tone 3 Hz below the range puts its main-lobe skirt (first zero at 4 bins,
    # Heinzel et al. 2002, from memory) across the range edge, 40 dB above a real -60 dBFS tone
    # inside it; the skirt is not a tone and must not be returned.
    rate = 48000
    x = synth([(1000.0, 0.0, 0.0), (1015.0, -60.0, 0.5)], rate, 1.0, noise_rms=1e-6)
    s = averaged_spectrum(x, rate)
    t = locate_tone(s, 1003.0, 1030.0)
    assert t is not None
    assert t.frequency_hz == pytest.approx(1015.0, abs=0.1)
    assert t.level_dbfs == pytest.approx(-60.0, abs=0.1)


def test_locate_tone_on_a_bare_skirt_finds_nothing():
    # Noiseless: between 1.4 and 3.8 bins from a tone the main lobe falls monotonically (first
    # zero at 4 bins, Heinzel et al. 2002, from memory), so there is no tone to return.
    rate = 48000
    s = averaged_spectrum(synth([(1000.0, 0.0, 0.0)], rate, 1.0), rate)
    assert locate_tone(s, 1000.0 + 1.4 * s.bin_hz, 1000.0 + 3.8 * s.bin_hz) is None


# ---- noise floor ------------------------------------------------------------------------


def _expected_noise_dbfs(sigma: float, s, iq: bool) -> float:
    # First principles (see conftest.sigma_for_bin_level): power in one ENBW is
    # P = 2*sigma**2*ENBW_Hz/fs; the sine of equal power reads 2P (real) or P (complex).
    p = 2 * sigma**2 * s.enbw_hz / s.rate_hz
    return float(10 * np.log10(p if iq else 2 * p))


@pytest.mark.parametrize("iq", [False, True])
@pytest.mark.parametrize("rate", [8000, 48000, 96000])
def test_local_noise_reads_the_injected_sigma(rate, iq):
    # Known sigma -> known level (+/-0.5 dB). Segments of 1/16 of the 2 s capture so that the
    # median over the neighbourhood is itself steady (its spread is ~0.35 dB with 1-2 segments).
    sigma = 1e-3
    nfft = 2 ** int(np.floor(np.log2(rate * 2.0 / 16)))
    x = synth([(0.1 * rate, -10.0, 0.3)], rate, 2.0, noise_rms=sigma, iq=iq, seed=rate)
    data = x[:, 0] + 1j * x[:, 1] if iq else x
    s = averaged_spectrum(data, rate, nfft)
    nf = local_noise(s, 0.1 * rate)  # centred on the tone: its main lobe must be left out
    assert nf.level_dbfs == pytest.approx(_expected_noise_dbfs(sigma, s, iq), abs=0.5)
    assert nf.detection_dbfs == pytest.approx(nf.level_dbfs + nf.threshold_db)


@pytest.mark.parametrize("single_segment", [True, False])
def test_local_noise_is_unbiased_over_many_captures(single_segment):
    # With one or two segments the median-to-mean correction matters most (for K = 1 the raw
    # median is ln 2 = -1.59 dB below the mean). Averaged over 24 seeds the error must vanish
    # to within 0.3 dB (the per-capture spread is ~0.35 dB, so the mean's is ~0.07 dB).
    rate, sigma = 48000, 1e-3
    errors = []
    for seed in range(24):
        x = synth([(3000.0, -20.0, 0.0)], rate, 1.0, noise_rms=sigma, seed=seed)
        s = averaged_spectrum(x, rate, 32768, overlap=0.0) if single_segment else averaged_spectrum(x, rate)
        errors.append(local_noise(s, 3000.0).level_dbfs - _expected_noise_dbfs(sigma, s, False))
    assert abs(np.mean(errors)) <= 0.3


def test_local_noise_ignores_spurs_and_excluded_components():
    # A few strong lines inside the neighbourhood must not lift the floor (median), and listed
    # components' main lobes are left out.
    rate, sigma = 48000, 1e-3
    nfft = 4096
    comps = [(5000.0, -10.0, 0.0), (5200.0, -20.0, 0.1), (4800.0, -25.0, 0.2), (5500.0, -30.0, 0.3)]
    x = synth(comps, rate, 2.0, noise_rms=sigma, seed=9)
    s = averaged_spectrum(x, rate, nfft)
    nf = local_noise(s, 5000.0, exclude_hz=(5200.0, 4800.0, 5500.0))
    assert nf.level_dbfs == pytest.approx(_expected_noise_dbfs(sigma, s, False), abs=0.5)


def test_median_to_mean_for_one_average_is_ln2():
    # Exponential distribution: median = ln 2 x mean (arithmetic).
    assert median_to_mean(1.0) == pytest.approx(np.log(2.0), rel=1e-9)


@pytest.mark.parametrize("k", [1.9, 3.0, 10.0, 40.0])
def test_median_to_mean_matches_gamma_distribution(k):
    # scipy.stats.gamma as reference implementation, and a Monte-Carlo draw from numpy.
    assert median_to_mean(k) == pytest.approx(stats.gamma.median(k) / k, rel=1e-9)
    draws = np.random.default_rng(1).gamma(k, 1.0 / k, size=200_000)
    assert median_to_mean(k) == pytest.approx(np.median(draws), rel=0.01)


def test_threshold_for_one_average():
    # Exponential noise: P(x > t*mean) = exp(-t) = 1e-4 -> t = -ln(1e-4) = 9.21, 9.64 dB
    # (arithmetic; false-alarm probability 1e-4 as the module states).
    assert threshold_db(1.0) == pytest.approx(10 * np.log10(-np.log(1e-4)), abs=1e-6)
    assert threshold_db(1.0) == pytest.approx(9.64, abs=0.005)


def test_threshold_shrinks_with_averaging_but_not_below_the_floor():
    # scipy.stats.gamma: isf(1e-4, K)/K falls towards 1 as K grows; the module's stated
    # floor of 6 dB then applies.
    values = [threshold_db(k) for k in (1.0, 1.5, 2.0, 3.0, 8.0)]
    assert values == sorted(values, reverse=True)
    assert threshold_db(2.0) == pytest.approx(10 * np.log10(stats.gamma.isf(1e-4, 2.0) / 2.0), abs=1e-9)
    assert threshold_db(200.0) == pytest.approx(6.0)


def test_false_alarm_rate_of_the_threshold_on_pure_noise():
    # Empirical check of the threshold's meaning: on pure white noise, bins above the mean
    # by threshold_db are rare (expected 1e-4 of them; allow 10x for bin correlation and luck).
    rate = 48000
    x = np.random.default_rng(4).standard_normal(rate * 2) * 1e-3
    s = averaged_spectrum(x, rate, 4096)
    nf = local_noise(s, 12000.0, half_width_bins=1000)
    exceed = np.mean(10 * np.log10(s.power[20:-20]) > nf.detection_dbfs)
    assert exceed < 1e-3


# ---- clipping ---------------------------------------------------------------------------


def test_clipped_channels_flags_runs_at_full_scale_only():
    # Common practice, no source: two or more consecutive samples at full scale are an "over".
    t = np.arange(4800) / 48000
    clean = 0.999 * np.sin(2 * np.pi * 1000 * t)
    hard = np.clip(1.3 * np.sin(2 * np.pi * 1000 * t), -1.0, 1.0)
    over = clean.copy()
    over[100] = 1.2  # float data beyond full scale, even a single sample
    flags = clipped_channels(np.column_stack([clean, hard, over]))
    assert flags == (False, True, True)


def test_clipped_channels_with_integer_full_scale():
    # 16-bit data: positive full scale reads 1 - 2**-15 (libsndfile's normalisation).
    lsb = 2.0**-15
    x = np.zeros(1000)
    x[10:13] = 1.0 - lsb
    assert clipped_channels(x, lsb) == (True,)
    y = np.zeros(1000)
    y[10] = 1.0 - lsb  # one touch is not an over
    y[20] = -1.0
    assert clipped_channels(y, lsb) == (False,)
    assert clipped_channels(x * 0.99, lsb) == (False,)
