"""Tone phasors by windowed DTFT, checked against numpy's FFT and against known tones."""

from __future__ import annotations

import numpy as np
import pytest

from rtanalyzer.dsp.phasors import tone_phasors, tones_envelope
from rtanalyzer.dsp.window import cosine_sum
from rtanalyzer.errors import RtaError

FS = 48000.0
N = 4096


def test_bin_centred_tone_matches_numpy_fft():
    # At f = k*fs/N the windowed DTFT is bin k of the windowed FFT (definition of the DFT);
    # numpy's FFT is the independent reference, scaled by 2/sum(w) for a one-sided real tone.
    k = 107
    f = k * FS / N
    t = np.arange(N) / FS
    x = 0.3 * np.cos(2 * np.pi * f * t + 0.7) + 1e-3 * np.random.default_rng(1).standard_normal(N)
    w = cosine_sum(N)
    reference = 2.0 * np.fft.fft(w * x)[k] / w.sum()
    ours = tone_phasors(x, FS, [f])[0]
    assert ours == pytest.approx(reference, rel=1e-12, abs=1e-15)
    # ...and both recover the tone (noise 50 dB down leaves < 0.01 dB and 0.05 degrees here).
    assert abs(ours) == pytest.approx(0.3, rel=1e-3)
    assert np.angle(ours) == pytest.approx(0.7, abs=1e-3)


def test_rectangular_window_matches_numpy_fft_for_complex_samples():
    k = -250  # a negative frequency of an I/Q signal: FFT bin N - 250
    f = k * FS / N
    t = np.arange(N) / FS
    z = 0.2 * np.exp(1j * (2 * np.pi * f * t - 1.1))
    reference = np.fft.fft(z)[k % N] / N
    ours = tone_phasors(z, FS, [f], window=np.ones(N))[0]
    assert ours == pytest.approx(reference, rel=1e-12)
    assert ours == pytest.approx(0.2 * np.exp(-1.1j), rel=1e-12)


def test_two_tones_between_bins_are_separated():
    # Analytic answer: each tone's own amplitude and phase; the other is 25 bins away,
    # far below the window's -92 dB sidelobes (Harris 1978, 4-term Blackman-Harris).
    t = np.arange(N) / FS
    x = 0.25 * np.cos(2 * np.pi * 700.3 * t + 0.2) + 0.125 * np.cos(2 * np.pi * 1000.9 * t - 2.0)
    c = tone_phasors(x, FS, [700.3, 1000.9])
    assert c == pytest.approx([0.25 * np.exp(0.2j), 0.125 * np.exp(-2.0j)], abs=1e-5)


def test_envelope_of_refitted_tones_equals_the_true_envelope():
    t = np.arange(N) / FS
    x = 0.25 * np.cos(2 * np.pi * 700.0 * t + 0.4) + 0.25 * np.cos(2 * np.pi * 1900.0 * t)
    c = tone_phasors(x, FS, [700.0, 1900.0])
    env = tones_envelope(c, FS, [700.0, 1900.0], N)
    # |a e^{j w1 t + p} + a e^{j w2 t}| = 2a|cos((w2 - w1)t/2 - p/2)| (arithmetic)
    expected = 0.5 * np.abs(np.cos(np.pi * 1200.0 * t - 0.2))
    assert np.max(np.abs(env - expected)) < 1e-5


@pytest.mark.parametrize(
    "call",
    [
        lambda: tone_phasors(np.zeros((4, 2)), FS, [1000.0]),
        lambda: tone_phasors(np.zeros(64), FS, [30000.0]),
        lambda: tone_phasors(np.zeros(64), FS, [-10.0]),
        lambda: tone_phasors(np.zeros(64), 0.0, [10.0]),
        lambda: tone_phasors(np.zeros(64), FS, [10.0], window=np.ones(3)),
        lambda: tones_envelope([1.0], FS, [1.0, 2.0], 10),
    ],
)
def test_bad_inputs_are_one_line_errors(call):
    with pytest.raises(RtaError):
        call()
