"""Complex amplitudes (phasors) of known tones in a window of samples, and the envelope they make.

A display of linearity compares the envelope a signal actually has with the envelope its
fundamental tones alone would make. The second needs each tone's amplitude and phase over the
window: :func:`tone_phasors` evaluates the windowed discrete-time Fourier transform (DTFT)
exactly at each tone's frequency (no bin grid, so no scalloping for a tone that lies between
bins), and :func:`tones_envelope` rebuilds the envelope of their sum.
"""

from __future__ import annotations

import numpy as np

from rtanalyzer.dsp.window import cosine_sum
from rtanalyzer.errors import RtaError


def _check(samples, rate_hz: float, frequencies_hz) -> tuple[np.ndarray, float, np.ndarray]:
    x = np.asarray(samples)
    if x.ndim != 1 or x.size < 2:
        raise RtaError(f"samples must be one-dimensional with at least 2 values; got shape {x.shape}")
    rate = float(rate_hz)
    if not np.isfinite(rate) or rate <= 0:
        raise RtaError(f"rate_hz = {rate_hz!r} must be a finite sample rate above 0 Hz")
    freqs = np.atleast_1d(np.asarray(frequencies_hz, dtype=np.float64))
    if freqs.ndim != 1 or not np.all(np.isfinite(freqs)):
        raise RtaError(f"frequencies_hz = {frequencies_hz!r} must be a list of finite frequencies in Hz")
    if np.iscomplexobj(x):
        bad = freqs[np.abs(freqs) >= rate]
        allowed = f"-{rate:g} < f < {rate:g} Hz"
    else:
        bad = freqs[(freqs < 0) | (freqs >= rate / 2.0)]
        allowed = f"0 <= f < {rate / 2:g} Hz (Nyquist)"
    if bad.size:
        raise RtaError(f"tone frequency {bad[0]:g} Hz cannot be measured at {rate:g} Hz sampling; allowed: {allowed}")
    return x, rate, freqs


def tone_phasors(samples, rate_hz: float, frequencies_hz, window: np.ndarray | None = None) -> np.ndarray:
    """Complex amplitude of each tone over the window of samples: A·exp(jφ) for A·cos(2πft + φ).

    Parameters
    ----------
    samples : array_like, shape (n,)
        Real samples, or complex I + jQ samples.
    rate_hz : float
        Sample rate, Hz.
    frequencies_hz : sequence of float
        The tones' frequencies, Hz: 0 <= f < rate/2 for real samples; -rate < f < rate for
        complex ones (a negative frequency is a tone turning the other way).
    window : array_like, shape (n,), optional
        Weights applied before the transform; default the 4-term Blackman-Harris window
        (periodic), whose sidelobes keep the other tones' leakage below -92 dB once they are
        four bins (4·rate/n Hz) away.

    Returns
    -------
    numpy.ndarray of complex, shape (len(frequencies_hz),)
        For a real tone A·cos(2πft + φ), the value A·exp(jφ); for a complex tone
        A·exp(j(2πft + φ)), also A·exp(jφ). Time t = 0 is the first sample.

    Raises
    ------
    RtaError
        Samples not one-dimensional, a bad rate, or a frequency outside the allowed range.

    Notes
    -----
    The windowed DTFT at frequency f, X(f) = Σ w[n]·x[n]·exp(-j2πfn/fs), is divided by the
    window's sum (its coherent gain times n), which makes it A·exp(jφ)/2 for a real tone (the
    other half sits at -f) and A·exp(jφ) for a complex one; real samples are therefore doubled.
    At f = k·fs/n this is the windowed FFT's bin k (see the example). Two real tones closer
    than the window's main lobe (±4 bins here) leak into each other's estimate.

    References
    ----------
    .. [1] F. J. Harris, "On the use of windows for harmonic analysis with the discrete Fourier
       transform", Proc. IEEE 66(1), 51-83, 1978 (the windowed DTFT and the Blackman-Harris
       window).

    Examples
    --------
    A tone of peak 0.5 and phase 30 degrees, between bins:

    >>> import numpy as np
    >>> fs, n = 48000.0, 4096
    >>> t = np.arange(n) / fs
    >>> x = 0.5 * np.cos(2 * np.pi * 1234.5 * t + np.radians(30.0))
    >>> c = tone_phasors(x, fs, [1234.5])[0]
    >>> round(float(abs(c)), 4), round(float(np.degrees(np.angle(c))), 2)
    (0.5, 30.0)
    """
    x, rate, freqs = _check(samples, rate_hz, frequencies_hz)
    n = x.size
    w = cosine_sum(n) if window is None else np.asarray(window, dtype=np.float64)
    if w.shape != (n,):
        raise RtaError(f"window has shape {w.shape}; it must match the samples, ({n},)")
    gain = float(np.sum(w))
    if gain == 0.0:
        raise RtaError("window sums to zero; give a window with a non-zero sum")
    weighted = w * x
    k = np.arange(n, dtype=np.float64)
    kernel = np.exp(-2j * np.pi * np.outer(freqs / rate, k))  # (tones, n)
    values = kernel @ weighted / gain
    return values if np.iscomplexobj(x) else 2.0 * values


def tones_envelope(phasors, rate_hz: float, frequencies_hz, frames: int) -> np.ndarray:
    """Envelope |Σ c_k·exp(j2πf_k·t)| of tones with complex amplitudes ``phasors``, t = n/rate.

    This is the magnitude of the analytic signal of Σ |c_k|·cos(2πf_k·t + arg c_k) (positive
    frequencies), or of the complex signal itself (any sign of frequency).

    Parameters
    ----------
    phasors : array_like of complex
        Complex amplitudes, as :func:`tone_phasors` returns them.
    rate_hz : float
    frequencies_hz : sequence of float
        One frequency per phasor, Hz.
    frames : int
        Number of samples from t = 0.

    Returns
    -------
    numpy.ndarray of float, shape (frames,)

    Examples
    --------
    Two equal tones of peak 0.25 beat to an envelope peak of 0.5 (their PEP):

    >>> import numpy as np
    >>> env = tones_envelope([0.25, 0.25], 48000.0, [700.0, 1900.0], 480)
    >>> round(float(env.max()), 6), round(float(env[0]), 6)
    (0.5, 0.5)
    """
    c = np.atleast_1d(np.asarray(phasors, dtype=np.complex128))
    freqs = np.atleast_1d(np.asarray(frequencies_hz, dtype=np.float64))
    if c.shape != freqs.shape:
        raise RtaError(f"{c.size} phasors for {freqs.size} frequencies; give one phasor per frequency")
    if isinstance(frames, bool) or int(frames) != frames or frames < 0:
        raise RtaError(f"frames = {frames!r} must be a whole number >= 0")
    t = np.arange(int(frames), dtype=np.float64) / float(rate_hz)
    return np.abs(np.exp(2j * np.pi * np.outer(t, freqs)) @ c)
