"""Phase and amplitude of one tone on two channels, and what their departure from quadrature costs.

A phasing exciter's audio network turns one audio tone into two, I and Q, that should be equal in
amplitude and 90 degrees apart. Recorded on the left and right inputs of a sound card, each tone
is measured by the windowed discrete-time Fourier transform (DTFT) evaluated at the tone's own
frequency over every sample in which the tone is present (no bin grid, so no scalloping and no
phase bias for a tone between bins). The same window and the same frequency are used on both
channels, so a small error in the frequency shifts both phases and both magnitudes alike and
leaves their difference and ratio untouched.

With the 4-term Blackman-Harris window a second tone further than four of the span's bins away
(4/T Hz for a span of T seconds: 2 Hz for a 2-s capture) leaks in below -92 dB.

References
----------
.. [1] F. J. Harris, "On the use of windows for harmonic analysis with the discrete Fourier
   transform", Proc. IEEE 66(1), 51-83, 1978 (windowed DTFT; Blackman-Harris window).
.. [2] D. C. Rife, R. R. Boorstyn, "Single-tone parameter estimation from discrete-time
   observations", IEEE Trans. Inf. Theory 20(5), 591-598, 1974 (phase variance of a tone in
   white noise, which :func:`phase_std_rad` follows with the window's noise bandwidth).
.. [3] B. Razavi, *RF Microelectronics*, chapter on image-reject architectures (the
   image-rejection relation of :func:`image_rejection_db`).
"""

from __future__ import annotations

import numpy as np

from rtanalyzer.dsp.spectrum import Spectrum
from rtanalyzer.dsp.tones import refine_peak
from rtanalyzer.dsp.window import BLACKMAN_HARRIS_4, cosine_sum, figures

#: Frames of the short-time power that tells where a tone is present, in seconds.
OCCUPANCY_FRAME_S = 0.04
#: A tone counts as present in a frame when its power is within this factor of its loudest frame.
OCCUPANCY_FRACTION = 0.1
#: Part of a stepped tone's dwell left out at its start (the network and the generator settle).
SETTLE_FRACTION = 0.2
#: Numerical guard only: the relation is infinite for errors of exactly zero and JSON cannot
#: carry infinity, so :func:`image_rejection_db` stops here. It is never a measured figure: a
#: point's figure that reaches it is reported as a lower bound (:func:`noise_limited_suppression`).
MAX_SUPPRESSION_DB = 200.0
#: An error counts as measured when it stands this many of its standard deviations clear of zero
#: (see :func:`noise_limited_suppression`).
NOISE_SIGMAS = 3.0
# Longest window taken from the shared cache (1 Mi samples = 8 MiB).
_CACHED_WINDOW = 1 << 20


def image_rejection_db(gain_ratio, phase_error_rad) -> np.ndarray:
    """Opposite-sideband suppression of a quadrature pair with amplitude ratio g and phase error ε.

    ``10·log10((1 + 2g·cos ε + g²) / (1 - 2g·cos ε + g²))``, kept finite by the numerical guard
    :data:`MAX_SUPPRESSION_DB` (reached only for errors of about 1e-10 or exactly zero).

    Parameters
    ----------
    gain_ratio : array_like
        Amplitude ratio g of the two paths (either way round: g and 1/g give the same figure).
    phase_error_rad : array_like
        Departure ε from quadrature, radians (its sign does not matter either).

    Returns
    -------
    ndarray
        Suppression in dB; broadcast over both arguments.

    References
    ----------
    The image-rejection relation of quadrature (image-reject) modulators, e.g. B. Razavi,
    *RF Microelectronics*, chapter on image-reject architectures.

    Notes
    -----
    Written as ``((1 + g)² - 4g·sin²(ε/2)) / ((1 - g)² + 4g·sin²(ε/2))``, the same quantity
    without the cancellation of ``1 - 2g·cos ε + g²`` for tiny errors (cos ε rounds to 1 below
    ε ≈ 1e-8), so a small error still gives its own figure rather than the guard.

    Examples
    --------
    Equal amplitudes and a 1 degree phase error:

    >>> round(float(image_rejection_db(1.0, np.radians(1.0))), 1)
    41.2
    """
    g = np.asarray(gain_ratio, dtype=np.float64)
    s2 = 4.0 * g * np.sin(0.5 * np.asarray(phase_error_rad, dtype=np.float64)) ** 2
    num = (1.0 + g) ** 2 - s2
    den = np.maximum((1.0 - g) ** 2 + s2, 0.0)
    with np.errstate(divide="ignore"):
        value = 10.0 * np.log10(num / den)
    return np.minimum(value, MAX_SUPPRESSION_DB)


def amplitude_only_error_db(suppression_db) -> np.ndarray:
    """The amplitude ratio (dB, either way round) that alone, in exact quadrature, gives a suppression.

    With ε = 0 the image-rejection relation is S = 20·log10((1 + g)/(1 - g)), so with
    r = 10^(S/20) the ratio is g = (r - 1)/(r + 1), that is ``20·log10((r + 1)/(r - 1))`` dB.
    No amplitude error alone gives S ≤ 0 dB: NaN there.

    Examples
    --------
    0.1 dB alone allows 44.8 dB (:func:`image_rejection_db`), and back:

    >>> round(float(amplitude_only_error_db(image_rejection_db(10 ** (0.1 / 20), 0.0))), 6)
    0.1
    """
    s = np.asarray(suppression_db, dtype=np.float64)
    r = 10.0 ** (np.where(s > 0.0, s, np.nan) / 20.0)
    return 20.0 * np.log10((r + 1.0) / (r - 1.0))


def phase_only_error_deg(suppression_db) -> np.ndarray:
    """The departure from quadrature (degrees) that alone, with equal amplitudes, gives a suppression.

    With g = 1 the image-rejection relation is S = 10·log10((1 + cos ε)/(1 - cos ε))
    = -20·log10(tan(ε/2)), so ε = 2·atan(10^(-S/20)).

    Examples
    --------
    >>> round(float(phase_only_error_deg(image_rejection_db(1.0, np.radians(1.0)))), 6)
    1.0
    """
    s = np.asarray(suppression_db, dtype=np.float64)
    return np.degrees(2.0 * np.arctan(10.0 ** (-s / 20.0)))


def noise_limited_suppression(ratio_db, error_deg, ratio_std_db, error_std_deg,
                              sigmas: float = NOISE_SIGMAS) -> tuple[np.ndarray, np.ndarray]:
    """The suppression measured amplitude and phase errors allow, or its lower bound where noise hides them.

    Parameters
    ----------
    ratio_db : array_like
        Amplitude ratio of the two paths, dB (either sign).
    error_deg : array_like
        Departure from quadrature, degrees (either sign).
    ratio_std_db, error_std_deg : array_like
        Standard deviations of those two figures (from the noise, :func:`phase_std_rad`).
    sigmas : float
        How many standard deviations make an error "measured".

    Returns
    -------
    (ndarray, ndarray of bool)
        The suppression in dB, and True where it is only a lower bound.

    Notes
    -----
    The errors are judged together, through the relation itself: noise alone, errors of
    ``sigmas`` standard deviations on both figures, would allow S_n = image_rejection(sigmas·σ_g,
    sigmas·σ_ε). The measured errors are above the noise when they allow less than that
    (for small errors the unwanted power goes as δ² + ε², so this asks that the measured error
    vector be longer than the noise's; with equal σ on both, as :func:`phase_std_rad` gives, zero
    true error passes it with probability exp(-sigmas²), 1e-4 at 3). Then the figure is the
    relation at the measured errors. Otherwise it is a lower bound: the relation at the largest
    errors the measurement allows, |measured| + sigmas·σ on each (each true error lies within
    that of its measured value), which never exceeds S_n nor the figure the measured errors would
    give. A figure at the guard :data:`MAX_SUPPRESSION_DB` is a lower bound too.

    Examples
    --------
    A 1 degree error measured to ±0.01 degree is a figure; 0.001 degree measured to ±0.01 is noise:

    >>> v, b = noise_limited_suppression([0.0, 0.0], [1.0, 0.001], [0.0002, 0.0002], [0.01, 0.01])
    >>> [round(float(x), 1) for x in v], [bool(x) for x in b]
    ([41.2, 71.3], [False, True])
    """
    a = np.abs(np.asarray(ratio_db, dtype=np.float64))
    e = np.abs(np.asarray(error_deg, dtype=np.float64))
    sa = np.abs(np.asarray(ratio_std_db, dtype=np.float64)) * sigmas
    se = np.abs(np.asarray(error_std_deg, dtype=np.float64)) * sigmas
    measured = image_rejection_db(10.0 ** (a / 20.0), np.radians(e))
    noise = image_rejection_db(10.0 ** (sa / 20.0), np.radians(se))
    bound = image_rejection_db(10.0 ** ((a + sa) / 20.0), np.radians(e + se))
    hidden = ~(measured < noise)
    value = np.where(hidden, bound, measured)
    return value, hidden | (value >= MAX_SUPPRESSION_DB)


def wrap_deg(angle_deg) -> np.ndarray:
    """Angle in degrees wrapped into (-180, 180].

    Examples
    --------
    >>> [float(a) for a in wrap_deg([180.0, -180.0, 270.0, -90.0])]
    [180.0, 180.0, -90.0, -90.0]
    """
    a = np.asarray(angle_deg, dtype=np.float64)
    wrapped = np.mod(a + 180.0, 360.0) - 180.0
    return np.where(wrapped == -180.0, 180.0, wrapped)


def pair_phasors(left, right, rate_hz: float, frequency_hz: float, start: int = 0,
                 stop: int | None = None) -> tuple[complex, complex]:
    """Complex amplitude of one tone on each channel over samples ``start:stop``.

    Parameters
    ----------
    left, right : array_like, shape (n,)
        Real samples of the two channels, full scale 1.0, sampled together.
    rate_hz : float
        Sample rate, Hz.
    frequency_hz : float
        The tone's frequency, 0 < f < rate/2.
    start, stop : int
        Span of samples to use (default: all).

    Returns
    -------
    (complex, complex)
        ``A·exp(jφ)`` for a tone ``A·cos(2πf(t - t0) + φ)`` on each channel, t0 the time of
        sample ``start``.

    Raises
    ------
    ValueError
        For channels of different lengths, a span shorter than 8 samples, or a frequency
        outside (0, rate/2).

    Notes
    -----
    X(f) = 2·Σ w[n]·x[n]·exp(-j2πfn/fs) / Σ w[n] with the Blackman-Harris window over the span
    (Harris 1978). Both channels share the kernel, so their difference of phase and ratio of
    magnitude do not depend on small errors in ``frequency_hz``.

    Examples
    --------
    A 1 kHz tone whose right channel lags the left by a quarter period (250 µs = 90 degrees):

    >>> fs = 48000.0
    >>> t = np.arange(96000) / fs
    >>> l, r = pair_phasors(np.cos(2e3 * np.pi * t), 0.5 * np.sin(2e3 * np.pi * t), fs, 1000.0)
    >>> round(float(np.degrees(np.angle(l) - np.angle(r))), 6), round(float(abs(r / l)), 6)
    (90.0, 0.5)
    """
    return SpanPhasors(left, right, rate_hz, start, stop).at(frequency_hz)


class SpanPhasors:
    """Windowed DTFT of two channels over one span, at any number of frequencies.

    The window-weighted samples are made once; each frequency then costs one complex kernel
    (built from two short exponentials, block by block) and one matrix product. See
    :func:`pair_phasors` for the arguments and the result.
    """

    BLOCK = 4096

    def __init__(self, left, right, rate_hz: float, start: int = 0, stop: int | None = None) -> None:
        x = np.asarray(left, dtype=np.float64)
        y = np.asarray(right, dtype=np.float64)
        if x.shape != y.shape or x.ndim != 1:
            raise ValueError(f"left and right must be 1-D of one length; got shapes {x.shape} and {y.shape}")
        stop = x.size if stop is None else int(stop)
        start = int(start)
        if not 0 <= start < stop <= x.size or stop - start < 8:
            raise ValueError(f"span {start}:{stop} must hold at least 8 of the {x.size} samples")
        n = stop - start
        w = cosine_sum(n) if n <= _CACHED_WINDOW else _window(n)
        self.rate_hz = float(rate_hz)
        self.size = n
        self._weighted = np.stack([x[start:stop] * w, y[start:stop] * w])  # (2, n)
        self._scale = 2.0 / float(w.sum())

    def at(self, frequency_hz: float) -> tuple[complex, complex]:
        """(left, right) complex amplitudes of the tone at ``frequency_hz``."""
        if not 0.0 < frequency_hz < self.rate_hz / 2.0:
            raise ValueError(f"frequency {frequency_hz:g} Hz must lie in (0, {self.rate_hz / 2:g}) Hz")
        step = -2.0 * np.pi * frequency_hz / self.rate_hz
        b = min(self.BLOCK, self.size)
        blocks = -(-self.size // b)
        # exp(j·step·(i·b + k)) = exp(j·step·i·b) · exp(j·step·k): two short exponentials.
        kernel = (np.exp(1j * step * b * np.arange(blocks))[:, None] * np.exp(1j * step * np.arange(b))[None, :])
        pairs = kernel.reshape(-1)[: self.size].view(np.float64).reshape(self.size, 2)
        (lr, li), (rr, ri) = self._weighted @ pairs
        return complex(lr, li) * self._scale, complex(rr, ri) * self._scale


def _window(n: int) -> np.ndarray:
    """The same window, not cached (long spans would fill the cache with big arrays)."""
    k = np.arange(n)
    return sum((-1) ** m * a * np.cos(2.0 * np.pi * m * k / n) for m, a in enumerate(BLACKMAN_HARRIS_4))


def occupied_span(left, right, rate_hz: float, frequency_hz: float) -> tuple[int, int]:
    """The samples in which a tone is steadily present: all of them, or one step of a sweep.

    The tone's power is followed in short frames (:data:`OCCUPANCY_FRAME_S`, half overlapped,
    DTFT at the tone's frequency). When its median frame is within :data:`OCCUPANCY_FRACTION` of
    its loudest, the tone is steady and the whole capture is used. Otherwise it is a step of a
    sweep (or a burst): the longest run of frames within that fraction of the loudest, less its
    first :data:`SETTLE_FRACTION` and its edge frames.

    Parameters
    ----------
    left, right : array_like, shape (n,)
    rate_hz : float
    frequency_hz : float

    Returns
    -------
    (int, int)
        ``start, stop`` sample indices.
    """
    x = np.asarray(left, dtype=np.float64)
    y = np.asarray(right, dtype=np.float64)
    m = max(64, int(round(OCCUPANCY_FRAME_S * rate_hz)))
    hop = m // 2
    if x.size < 4 * m:
        return 0, x.size
    count = 1 + (x.size - m) // hop
    kernel = np.exp(-2j * np.pi * (frequency_hz / rate_hz) * np.arange(m)) * cosine_sum(m)
    frames = np.lib.stride_tricks.sliding_window_view(x, m)[::hop][:count]
    power = np.abs(frames @ kernel) ** 2
    frames = np.lib.stride_tricks.sliding_window_view(y, m)[::hop][:count]
    power += np.abs(frames @ kernel) ** 2
    top = float(power.max())
    if top <= 0.0 or float(np.median(power)) >= OCCUPANCY_FRACTION * top:
        return 0, x.size
    present = np.concatenate([[False], power >= OCCUPANCY_FRACTION * top, [False]])
    edges = np.flatnonzero(np.diff(present.astype(np.int8)))
    runs = edges.reshape(-1, 2)  # [first frame, one past the last] of each run
    first, last = runs[np.argmax(runs[:, 1] - runs[:, 0])]
    start = first * hop + hop  # the first frame may hold the step's edge
    stop = (last - 1) * hop + m - hop
    start += int(SETTLE_FRACTION * max(0, stop - start))
    if stop - start < m:
        start, stop = first * hop, (last - 1) * hop + m
    return int(start), int(min(stop, x.size))


def phase_std_rad(amplitude: float, noise_power: float, noise_enbw_hz: float, span: int, rate_hz: float) -> float:
    """Standard deviation of a tone's phase estimated by :func:`pair_phasors` in white noise.

    Parameters
    ----------
    amplitude : float
        The tone's peak amplitude.
    noise_power : float
        Noise on the spectrum scale of ``dsp.spectrum`` (squared amplitude of the sine of equal
        power) in a bandwidth of ``noise_enbw_hz``.
    noise_enbw_hz : float
        The bandwidth that ``noise_power`` was measured in.
    span : int
        Samples the estimate used.
    rate_hz : float

    Returns
    -------
    float
        Radians; the magnitude's relative standard deviation has the same value.

    Notes
    -----
    The estimate's noise is the noise in the span window's bandwidth, ENBW·fs/span; half of it
    is at right angles to the tone. This is the Cramér-Rao bound of Rife & Boorstyn (1974),
    σ² = 2σ_n²/(A²N) for a rectangular window, raised by the window's ENBW (2.0 bins here).
    """
    if amplitude <= 0.0:
        return float("inf")
    bandwidth = figures(max(8, min(span, 1 << 16))).enbw_bins * rate_hz / span
    return float(np.sqrt(max(noise_power, 0.0) * bandwidth / noise_enbw_hz / 2.0) / amplitude)


def correct_right_channel(z, rate_hz: float, gain_db: float, phase_deg: float, delay_s: float) -> np.ndarray:
    """Take a known response of the right input relative to the left out of an I + jQ signal.

    The right channel is taken to respond as ``g·exp(j(φ0 - 2πfτ))`` times the left, with
    g = 10**(gain_db/20), φ0 = ``phase_deg`` and τ = ``delay_s`` (right later than left); its
    spectrum is divided by that response (an exact frequency-domain correction over the whole
    capture; the circular wrap of a delay of a few samples is harmless to windowed analysis).

    Parameters
    ----------
    z : array_like of complex, shape (n,)
        left + j·right.
    rate_hz : float
    gain_db, phase_deg, delay_s : float
        The right input's gain (dB), phase (degrees) and delay (seconds) relative to the left.

    Returns
    -------
    ndarray of complex
        left + j·(corrected right).

    Examples
    --------
    A right channel 0.2 dB hot and 0.5 degrees late at 1 kHz is put back:

    >>> fs = 48000.0
    >>> t = np.arange(48000) / fs
    >>> z = np.cos(2e3 * np.pi * t) + 1j * 10 ** (0.01) * np.cos(2e3 * np.pi * t - np.radians(0.5))
    >>> fixed = correct_right_channel(z, fs, 0.2, -0.5, 0.0)
    >>> l, r = pair_phasors(fixed.real, fixed.imag, fs, 1000.0)
    >>> bool(abs(20 * np.log10(abs(r / l))) < 1e-6), bool(abs(np.degrees(np.angle(r / l))) < 1e-6)
    (True, True)
    """
    z = np.asarray(z)
    right = np.fft.rfft(z.imag)
    f = np.fft.rfftfreq(z.size, 1.0 / rate_hz)
    response = 10.0 ** (gain_db / 20.0) * np.exp(1j * (np.radians(phase_deg) - 2.0 * np.pi * f * delay_s))
    fixed = np.fft.irfft(right / response, n=z.size)
    return z.real + 1j * fixed


def is_steady(left, right, rate_hz: float, frequency_hz: float) -> bool:
    """True when a tone is present throughout the capture (not a step of a sweep or a burst)."""
    start, stop = occupied_span(left, right, rate_hz, frequency_hz)
    return start == 0 and stop == np.asarray(left).size


def sweep_steps(left, right, rate_hz: float, range_db: float = 40.0,
                min_tone_hz: float = 20.0) -> list[tuple[int, int, float]]:
    """Steps of a stepped sweep: where each tone plays steadily, and its rough frequency.

    The capture is cut into half-overlapped frames of about :data:`OCCUPANCY_FRAME_S`; in each the
    strongest peak above ``min_tone_hz`` is located to a fraction of a bin (``dsp.tones``). A step
    is a run of three or more frames whose peak stays within 1 Hz (or 0.5 %) of the previous
    frame's and within ``range_db`` of the loudest frame; frames that straddle two steps give
    runs of their own that are too short to count. The first :data:`SETTLE_FRACTION` of each
    step and its edge frames are left out. A frequency played in several passes keeps its
    longest step.

    Parameters
    ----------
    left, right : array_like, shape (n,)
    rate_hz : float
    range_db : float
        Frames whose peak is weaker than the loudest frame's by more than this are silence.
    min_tone_hz : float
        Peaks below this are DC or hum.

    Returns
    -------
    list of (start, stop, frequency_hz)
        Sample spans and rough frequencies (to about 0.1 of a frame's bin), ascending in
        frequency.
    """
    x = np.asarray(left, dtype=np.float64)
    y = np.asarray(right, dtype=np.float64)
    m = int(2 ** np.round(np.log2(OCCUPANCY_FRAME_S * rate_hz)))
    hop = m // 2
    if x.size < 4 * m:
        return []
    count = 1 + (x.size - m) // hop
    w = cosine_sum(m)
    scale = 2.0 / w.sum()
    power = np.zeros((count, m // 2 + 1))
    for ch in (x, y):
        frames = np.lib.stride_tricks.sliding_window_view(ch, m)[::hop][:count]
        power += 0.5 * np.abs(np.fft.rfft(frames * w, axis=1) * scale) ** 2
    low = int(np.ceil(min_tone_hz * m / rate_hz)) + 1
    peak = np.argmax(power[:, low:-1], axis=1) + low
    level = power[np.arange(count), peak]
    on = (level >= level.max() * 10.0 ** (-range_db / 10.0)) & (level >= 100.0 * np.median(power, axis=1))
    freq = np.full(count, np.nan)
    for k in np.flatnonzero(on):
        spec = Spectrum(power[k], float(rate_hz), m, 1, False)
        freq[k] = refine_peak(spec, int(peak[k])).frequency_hz
    runs: list[tuple[int, int]] = []
    first = None
    for k in range(count + 1):
        same = (k < count and first is not None and on[k]
                and abs(freq[k] - freq[k - 1]) <= max(1.0, 0.005 * freq[k - 1]))
        if same:
            continue
        if first is not None and k - first >= 3:
            runs.append((first, k))
        first = k if k < count and on[k] else None
    steps: dict[float, tuple[int, int, float]] = {}
    for a, b in runs:
        start, stop = a * hop + hop, (b - 1) * hop + m - hop
        start += int(SETTLE_FRACTION * (stop - start))
        f = float(np.median(freq[a:b]))
        key = next((g for g in steps if abs(g - f) <= max(1.0, 0.005 * f)), f)
        if key not in steps or stop - start > steps[key][1] - steps[key][0]:
            steps.pop(key, None)
            steps[f] = (int(start), int(stop), f)
    return sorted(steps.values(), key=lambda s: s[2])
