"""The simulated bench, streamed: tones, 90° network, modulators, amplifier, receiver, sound card.

Signal chain (complex baseband, sampled at the capture rate):

1. audio tones, each with an exact rational phase accumulator (phase-continuous across calls);
2. I and Q audio paths: the network's exact response at each tone, plus the trimmers;
3. balanced modulators: z = I + j·Q·e^{jε} + carrier leak (RF = I·cos ωt - Q·sin(ωt + ε));
4. envelope amplifier (Rapp AM/AM with Saleh-type AM/PM, or cubic, or linear);
5. receiver: the carrier moved to ``carrier_offset_hz + tuning_error_hz`` (conjugated first for
   a spectrum-inverting receiver), real part or I/Q, Butterworth passband with kept state;
6. sound card: white Gaussian noise, quantization to the ADC step, hard clip at full scale.

Samples are float64 with full scale 1.0.
"""

from __future__ import annotations

import math
from fractions import Fraction
from typing import Sequence

import numpy as np
from scipy import signal

from rtanalyzer.sources.bench.amplifier import Amplifier
from rtanalyzer.sources.bench.knobs import BenchError, BenchKnobs
from rtanalyzer.sources.bench.network import path_responses
from rtanalyzer.sources.bench.truth import common_period_s, exact_truth, rational_hz
from rtanalyzer.sources.capture import MAX_RATE_HZ, MIN_RATE_HZ

CHUNK = 1 << 16  # frames per internal step: bounds the integer phase products below 2**47
LEAK_PHASE_RAD = math.radians(60.0)  # arbitrary fixed phase of the carrier leak
ADC_STEP = {"pcm16": 2.0**-15, "pcm24": 2.0**-23, "float32": 0.0}
MAX_DENOMINATOR = 1 << 31
_freqz_sos = getattr(signal, "freqz_sos", None) or signal.sosfreqz  # renamed in scipy 1.15


class _Phase:
    """Exact phase of rational frequencies: cycles at sample n = base + (a·n mod b) / b.

    Integer arithmetic makes every sample's phase independent of how rendering is split into
    blocks, so render(a) + render(b) is bit-identical to render(a + b).
    """

    def __init__(self, freqs_hz: Sequence[Fraction], rate_hz: float, base: float = 0.0) -> None:
        rate = rational_hz(rate_hz)
        ratios = [(f / rate).limit_denominator(MAX_DENOMINATOR) for f in freqs_hz]
        self.b = np.array([r.denominator for r in ratios], dtype=np.int64)
        self.a = np.array([r.numerator % r.denominator for r in ratios], dtype=np.int64)
        self.m = np.zeros(len(ratios), dtype=np.int64)
        self.base = np.full(len(ratios), float(base))

    def advance(self, frames: int) -> np.ndarray:
        """Cycles (frames, n_freqs) for the next ``frames`` samples (frames <= CHUNK)."""
        j = np.arange(frames, dtype=np.int64)[:, None]
        cycles = ((self.m + self.a * j) % self.b) / self.b + self.base
        self.m = (self.m + self.a * frames) % self.b
        return cycles

    def now(self) -> np.ndarray:
        """Current phase in cycles, in [0, 1)."""
        return (self.base + self.m / self.b) % 1.0


def _check_rate(rate_hz: float) -> float:
    rate = float(rate_hz)
    if not (math.isfinite(rate) and MIN_RATE_HZ <= rate <= MAX_RATE_HZ):
        raise BenchError(
            f"sample rate {rate_hz!r} Hz is outside the supported {MIN_RATE_HZ}..{MAX_RATE_HZ} Hz"
        )
    return rate


def _tone_amplitudes(tones_hz, tone_levels_db, rate: float) -> tuple[tuple[float, ...], np.ndarray]:
    tones = tuple(float(f) for f in np.atleast_1d(np.asarray(tones_hz, dtype=np.float64)))
    if not tones:
        raise BenchError("tones_hz is empty; give at least one tone")
    for f in tones:
        if not (math.isfinite(f) and 0.0 < f < rate / 2.0):
            raise BenchError(f"tone {f:g} Hz must lie between 0 and Nyquist ({rate / 2:g} Hz)")
    if len(set(tones)) != len(tones):
        raise BenchError(f"tones_hz={list(tones)} repeats a tone")
    if tone_levels_db is None:
        levels = np.zeros(len(tones))
    else:
        levels = np.atleast_1d(np.asarray(tone_levels_db, dtype=np.float64))
        if levels.shape != (len(tones),) or not np.all(np.isfinite(levels)) or np.any(np.abs(levels) > 60):
            raise BenchError(
                f"tone_levels_db={[float(x) for x in levels]} must give one finite level per tone "
                f"({len(tones)}), "
                f"each within -60..60 dB"
            )
    amps = 10.0 ** (levels / 20.0)
    return tones, amps / amps.sum()  # PEP of the ideal envelope is 1 (the sum of amplitudes)


def passband_sos(knobs: BenchKnobs, rate_hz: float) -> np.ndarray:
    """Receiver passband: Butterworth high-pass + low-pass (real), low-pass only (I/Q)."""
    high = min(knobs.rx_high_hz, 0.45 * rate_hz)  # the sound card's anti-alias filter
    if not knobs.iq and knobs.rx_low_hz >= high:
        raise BenchError(
            f"bench knob rx_low_hz={knobs.rx_low_hz:g} must be below the passband's high edge "
            f"{high:g} Hz at {rate_hz:g} Hz"
        )
    low_pass = signal.butter(knobs.rx_order, high, "lowpass", fs=rate_hz, output="sos")
    if knobs.iq:
        return low_pass
    high_pass = signal.butter(knobs.rx_order, knobs.rx_low_hz, "highpass", fs=rate_hz, output="sos")
    return np.vstack([high_pass, low_pass])


def settle_seconds(knobs: BenchKnobs, rate_hz: float) -> float:
    """Time for the passband's start-up transient to fall about 170 dB (20 time constants)."""
    edge = min(knobs.rx_high_hz, 0.45 * rate_hz) if knobs.iq else knobs.rx_low_hz
    slowest_decay = 2.0 * math.pi * edge * math.sin(math.pi / (2 * knobs.rx_order))  # Butterworth
    return max(0.01, 20.0 / slowest_decay)


class Bench:
    """The simulated exciter + receiver + sound card, rendered block by block.

    Parameters
    ----------
    knobs : BenchKnobs
        The bench setting; change it later with `set_knobs`.
    tones_hz : sequence of float
        Audio test tones in Hz (one, two, or a multitone), on a grid with a common period of
        at most 100 s (e.g. 0.01 Hz).
    rate_hz : float
        Sample rate.
    tone_levels_db : sequence of float, optional
        Relative levels of the tones, dB (default equal).
    seed : int
        Seed of the sound card's noise.

    Raises
    ------
    BenchError
        For a tone list, rate or setting the model cannot render honestly (e.g. a component
        beyond Nyquist).

    Examples
    --------
    >>> bench = Bench(BenchKnobs(), [1000.0], 48000)
    >>> bench.render(1024).shape
    (1024, 1)
    >>> round(bench.truth()["points"][0]["wanted_hz"], 1)
    5007.3
    """

    def __init__(
        self, knobs: BenchKnobs, tones_hz, rate_hz: float, tone_levels_db=None, seed: int = 0
    ) -> None:
        self._rate = _check_rate(rate_hz)
        self._tones, self._amps = _tone_amplitudes(tones_hz, tone_levels_db, self._rate)
        common_period_s(self._tones)  # fail now, not at truth()
        self._tone_phase = _Phase([rational_hz(f) for f in self._tones], self._rate)
        self._rng = np.random.default_rng(seed)
        self._lo: _Phase | None = None
        self._lo_hz: Fraction | None = None
        self._sos: np.ndarray | None = None
        self._zi: np.ndarray | None = None
        self.set_knobs(knobs)

    @property
    def knobs(self) -> BenchKnobs:
        return self._knobs

    @property
    def rate_hz(self) -> float:
        return self._rate

    @property
    def channels(self) -> int:
        return 2 if self._knobs.iq else 1

    @property
    def tones_hz(self) -> tuple[float, ...]:
        return self._tones

    def set_knobs(self, knobs: BenchKnobs) -> None:
        """Turn the knobs; effective from the next `render`. Tone phases stay continuous.

        The receiver's oscillator also stays continuous when it is retuned; the passband
        keeps its state unless its design changes (then it starts from rest, like a switched
        filter). A bad setting raises BenchError and leaves the bench as it was.

        Not thread-safe against a concurrent `render`: call it from the thread that renders
        (e.g. queue the user's knob changes and apply them between blocks).
        """
        knobs = knobs.validated()
        rate = self._rate
        side = 1.0 if knobs.wanted_side == "above" else -1.0
        carrier = rational_hz(knobs.carrier_offset_hz) + rational_hz(knobs.tuning_error_hz)
        nyquist = rate / 2.0
        if abs(float(carrier)) >= nyquist:
            raise BenchError(
                f"carrier_offset_hz + tuning_error_hz puts the carrier at {float(carrier):g} Hz, "
                f"beyond Nyquist ({nyquist:g} Hz at {rate:g} Hz)"
            )
        for f in self._tones:
            for where in (float(carrier) + side * f, float(carrier) - side * f):
                if abs(where) >= nyquist:
                    raise BenchError(
                        f"tone {f:g} Hz puts a sideband at {where:g} Hz, beyond Nyquist "
                        f"({nyquist:g} Hz); lower carrier_offset_hz or raise the rate"
                    )
        sos = passband_sos(knobs, rate)
        wanted_hz = np.abs(float(carrier) + side * np.asarray(self._tones))
        gain_at_wanted = self._gain_of(sos, wanted_hz)

        h_i, h_q = path_responses(np.asarray(self._tones), knobs)
        self._u_i = self._amps * h_i
        self._u_q = self._amps * h_q
        self._lo_rot = 1j * np.exp(1j * math.radians(knobs.lo_quadrature_error_deg))
        wanted_env = np.abs(self._u_i + self._lo_rot * self._u_q) / 2.0  # e^{+jωt} coefficients
        leak = wanted_env.max() * 10.0 ** (knobs.carrier_leak_dbc / 20.0)
        self._leak = leak * np.exp(1j * LEAK_PHASE_RAD)
        self._drive = 10.0 ** (knobs.drive_db / 20.0)  # ideal envelope PEP is 1: this is the PEP
        self._amp = Amplifier.from_knobs(knobs)
        self._side = side
        # Receiver gain: the ideal exciter (amplitudes a_k, linear) would peak at capture_pep_dbfs.
        self._gain = 10.0 ** (knobs.capture_pep_dbfs / 20.0) / float(np.sum(self._amps * gain_at_wanted))
        self._noise_sigma = 10.0 ** (knobs.noise_dbfs / 20.0) / math.sqrt(2.0)

        if self._lo is None:
            self._lo = _Phase([carrier], rate)
        elif carrier != self._lo_hz:
            self._lo = _Phase([carrier], rate, base=float(self._lo.now()[0]))
        self._lo_hz = carrier
        channels = 2 if knobs.iq else 1
        if self._sos is None or self._sos.shape != sos.shape or not np.array_equal(self._sos, sos) \
                or self._zi is None or self._zi.shape[2] != channels:
            self._zi = np.zeros((sos.shape[0], 2, channels))
        self._sos = sos
        self._knobs = knobs

    def _gain_of(self, sos: np.ndarray, freqs_hz: np.ndarray) -> np.ndarray:
        _, h = _freqz_sos(sos, worN=np.abs(np.asarray(freqs_hz, dtype=np.float64)), fs=self._rate)
        return np.abs(h)

    def _passband_gain(self, freqs_hz: np.ndarray) -> np.ndarray:
        return self._gain_of(self._sos, freqs_hz)

    def _envelope(self, cycles: np.ndarray) -> np.ndarray:
        """Exciter envelope after the amplifier for tone phases ``cycles`` (n, tones)."""
        phasors = np.exp(2j * np.pi * cycles)
        i_path = (phasors @ self._u_i).real
        q_path = (phasors @ self._u_q).real
        z = i_path + self._lo_rot * q_path + self._leak
        return self._amp(z * self._drive) / self._drive  # unit small-signal gain

    def render(self, frames: int) -> np.ndarray:
        """The next ``frames`` samples, shape (frames, channels), float64, full scale 1.0."""
        frames = int(frames)
        if frames < 0:
            raise BenchError(f"cannot render {frames} frames")
        out = np.empty((frames, self.channels))
        for start in range(0, frames, CHUNK):
            stop = min(start + CHUNK, frames)
            out[start:stop] = self._render_chunk(stop - start)
        return out

    def _render_chunk(self, n: int) -> np.ndarray:
        w = self._envelope(self._tone_phase.advance(n)) * self._gain
        if self._side < 0:
            w = np.conj(w)  # spectrum-inverting receiver
        w *= np.exp(2j * np.pi * self._lo.advance(n)[:, 0])
        x = w.real[:, None] if not self._knobs.iq else np.column_stack((w.real, w.imag))
        x, self._zi = signal.sosfilt(self._sos, x, axis=0, zi=self._zi)
        x += self._rng.standard_normal(x.shape) * self._noise_sigma
        return _adc(x, self._knobs.adc)

    def truth(self) -> dict:
        """Exact figures of the current setting (see `rtanalyzer.sources.bench.truth`)."""
        return exact_truth(
            self._knobs, self._tones, self._rate, self._envelope, self._gain, self._passband_gain
        )


def _adc(x: np.ndarray, adc: str) -> np.ndarray:
    """Quantize to the format's step and hard-clip at full scale (as the converter would)."""
    step = ADC_STEP[adc]
    if step == 0.0:
        return np.clip(x, -1.0, 1.0).astype(np.float32).astype(np.float64)
    return np.clip(np.round(x / step) * step, -1.0, 1.0 - step)


def simulate_capture(knobs: BenchKnobs, tones_hz, seconds: float, rate_hz: float, tone_levels_db=None,
                     seed: int = 0) -> tuple[np.ndarray, dict]:
    """A capture of the bench and its exact truth, start-up transient discarded.

    Parameters
    ----------
    knobs : BenchKnobs
    tones_hz : sequence of float
    seconds : float
        Length of the returned capture.
    rate_hz : float
    tone_levels_db : sequence of float, optional
    seed : int

    Returns
    -------
    samples : ndarray
        Shape (frames, 1) or (frames, 2), float64, full scale 1.0.
    truth : dict
        See `Bench.truth`.

    Examples
    --------
    >>> samples, truth = simulate_capture(BenchKnobs(), [1000.0], 0.5, 48000)
    >>> samples.shape, truth["carrier_hz"]
    ((24000, 1), 4007.3)
    """
    seconds = float(seconds)
    if not (math.isfinite(seconds) and 0.0 < seconds <= 600.0):
        raise BenchError(f"seconds={seconds!r} must be more than 0 and at most 600")
    bench = Bench(knobs, tones_hz, rate_hz, tone_levels_db, seed)
    frames = max(1, int(round(seconds * bench.rate_hz)))
    settle = int(math.ceil(settle_seconds(bench.knobs, bench.rate_hz) * bench.rate_hz))
    for start in range(0, settle, CHUNK):  # discard the receiver filter's start-up transient
        bench.render(min(CHUNK, settle - start))
    return bench.render(frames), bench.truth()
