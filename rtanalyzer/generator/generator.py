"""The test-signal generator: phase-continuous blocks, click-free fades, a hard level ceiling."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from rtanalyzer.generator.envelope import RISING, RaisedCosineRamp
from rtanalyzer.generator.errors import GeneratorError
from rtanalyzer.generator.oscillator import OscillatorBank
from rtanalyzer.generator.signals import SIGNAL_TYPES, Quadrature, Sweep
from rtanalyzer.generator.sweep import SweepPlan, SweepStep
from rtanalyzer.generator.voices import Voice, voice_for

MIN_RATE_HZ = 8_000
MAX_RATE_HZ = 192_000
MIN_RAMP_S = 0.001
MAX_RAMP_S = 10.0
MIN_CEILING_DBFS = -120.0
MAX_CEILING_DBFS = 0.0
_CHUNK = 4096  # frames rendered per inner step; the scratch arrays are this long


def _setting(name: str, value, low: float, high: float, unit: str) -> float:
    try:
        number = float(value)
    except (TypeError, ValueError):
        number = math.nan
    if isinstance(value, bool) or not (math.isfinite(number) and low <= number <= high):
        raise GeneratorError(f"Generator {name} = {value!r} is out of range; allowed: {low:g} to {high:g} {unit}")
    return number


@dataclass(frozen=True, eq=False)  # compared by identity: a hand-over tells one request from the next
class PreparedSignal:
    """A test signal checked against one generator's rate and channels, its voice worked out.

    Made by :meth:`Generator.prepare` in any thread, so that :meth:`Generator.change` on the
    rendering thread does no more than swap oscillators.
    """

    signal: object
    voice: Voice
    rate_hz: float
    channels: int


class Generator:
    """Renders a test signal block by block, at a level that never exceeds its set level or the ceiling.

    Parameters
    ----------
    signal : Tone, TwoTone, Multitone, Sweep or Quadrature
        What to play (see :mod:`rtanalyzer.generator.signals`).
    rate_hz : float
        Sample rate, 8000 to 192000 Hz.
    channels : int
        1 or 2. A mono signal is written identically to both channels of a stereo output; a
        :class:`Quadrature` signal needs 2 (I left, Q right).
    ramp_s : float
        Length of every fade, 0.001 to 10 s.
    ceiling_dbfs : float
        Highest level the generator will play, -120 to 0 dBFS (default -0.5): a signal set
        above it plays at the ceiling.

    Raises
    ------
    GeneratorError
        For a setting out of range or a signal that cannot be played at ``rate_hz`` with
        ``channels`` (above Nyquist, quadrature on one channel...).

    Notes
    -----
    Output is ``amplitude * gain(n) * voice(n)``: the voice has peak 1 (see
    :mod:`rtanalyzer.generator.voices`), the amplitude is ``10**(level_dbfs/20)`` with
    ``level_dbfs = min(signal level, ceiling)`` (the ceiling clamps the level, it never clips
    samples), and the gain is a raised-cosine fade between 0 and 1
    (:mod:`rtanalyzer.generator.envelope`). So no sample ever exceeds the level.

    * **Start**: the generator fades in from its first sample (which is 0); full level is
      reached ``ramp_s`` later, at sample ``round(ramp_s * rate_hz)``.
    * :meth:`stop` fades out, then silence; :meth:`start` fades back in.
    * :meth:`change` fades the old signal out, then the new one in (out-then-in, never both
      at once, so the output never exceeds the louder of the two levels). The new signal
      starts from its own phase zero, which is what gives a multitone its Schroeder phases.
    * :meth:`mute` silences from the next sample, no fade; :meth:`unmute` fades in.

    :attr:`signal_start` and :attr:`steady_from` say, in sample indices, where the signal now
    playing began and from which sample it plays at full level: what an analysis needs to date
    the tones it measures.

    A generator is not thread-safe: control calls and rendering belong to one thread.
    :meth:`prepare` alone may be called from any other (a sound-card source prepares a signal in
    the caller's thread and hands it to its rendering thread).

    Time runs on while muted or stopped: the oscillators keep their phase and a sweep keeps its
    schedule, so sample indices stay those of the output stream.

    Examples
    --------
    A 0 dBFS tone is clamped to the -0.5 dBFS ceiling:

    >>> from rtanalyzer.generator.signals import Tone
    >>> gen = Generator(Tone(1000.0, 0.0), 48000)
    >>> block = gen.render(4800)
    >>> round(float(20 * np.log10(np.abs(block[480:]).max())), 3), float(block[0, 0])
    (-0.5, 0.0)
    """

    def __init__(self, signal, rate_hz: float, channels: int = 1, ramp_s: float = 0.01,
                 ceiling_dbfs: float = -0.5) -> None:
        self._rate_hz = _setting("rate_hz", rate_hz, MIN_RATE_HZ, MAX_RATE_HZ, "Hz")
        if isinstance(channels, bool) or channels not in (1, 2):
            raise GeneratorError(f"Generator channels = {channels!r} is out of range; allowed: 1 or 2")
        self._channels = int(channels)
        self._ramp_s = _setting("ramp_s", ramp_s, MIN_RAMP_S, MAX_RAMP_S, "s")
        self._ceiling_dbfs = _setting("ceiling_dbfs", ceiling_dbfs, MIN_CEILING_DBFS, MAX_CEILING_DBFS, "dBFS")
        self._ramp = RaisedCosineRamp(max(1, int(round(self._ramp_s * self._rate_hz))), _CHUNK)
        self._gain = np.empty(_CHUNK)
        self._mix = np.empty((_CHUNK, 2))
        self._sample = 0
        self._full_at = 0  # sample at which the latest fade-in reached (or reaches) full gain
        self._muted = False
        self._stopped = False
        self._pending: tuple[object, Voice] | None = None
        self._install(signal, self._prepare(signal))
        self._ramp.rise_from_silence()

    # -- settings and state -------------------------------------------------------------------

    @property
    def rate_hz(self) -> float:
        return self._rate_hz

    @property
    def channels(self) -> int:
        return self._channels

    @property
    def ramp_frames(self) -> int:
        """Samples from a fade's first sample to its last, ``round(ramp_s * rate_hz)``."""
        return self._ramp.length

    @property
    def signal(self):
        """The signal now playing (a pending :meth:`change` shows once its fade-in begins)."""
        return self._signal

    @property
    def level_dbfs(self) -> float:
        """Level played: ``min(signal.level_dbfs, ceiling_dbfs)``."""
        return min(self._signal.level_dbfs, self._ceiling_dbfs)

    @property
    def sample_index(self) -> int:
        """Index of the next sample to be rendered (samples rendered so far)."""
        return self._sample

    @property
    def signal_start(self) -> int:
        """Sample index at which :attr:`signal` began (its phase zero, the first sample of its fade-in)."""
        return self._signal_start

    @property
    def steady_from(self) -> int | None:
        """First sample of :attr:`signal` at full level, if no control call intervenes; else None.

        None while muted, stopped, fading out or with a :meth:`change` pending. During a fade-in
        it is the sample the fade will reach full gain at; once there, the sample it did.
        """
        if self._muted or self._stopped or self._pending is not None:
            return None
        if self._ramp.direction == RISING:
            return self._sample + self._ramp.frames_to_end() - 1
        if self._ramp.position >= self._ramp.length:
            return self._full_at
        return None

    @property
    def sweep_plan(self) -> SweepPlan | None:
        """Timing of the :class:`Sweep` playing (from :attr:`signal_start`), or None for a steady signal."""
        return self._plan

    @property
    def silent(self) -> bool:
        """True while the output is zeros: muted, or stopped and faded out."""
        return self._muted or (self._ramp.silent and self._pending is None)

    # -- control ------------------------------------------------------------------------------

    def stop(self) -> None:
        """Fade out over ``ramp_s``, then silence; a pending :meth:`change` is dropped."""
        self._stopped = True
        self._pending = None
        self._ramp.fall()

    def start(self) -> None:
        """After :meth:`stop`: fade back in from the present gain (while muted: on :meth:`unmute`)."""
        if not self._stopped:
            return
        self._stopped = False
        if not self._muted:
            self._ramp.rise()

    def mute(self) -> None:
        """Zeros from the next sample, no fade; a pending :meth:`change` takes effect at once."""
        self._muted = True
        self._ramp.silence()
        if self._pending is not None:
            self._install(*self._pending)

    def unmute(self) -> None:
        """Fade in from silence (the first sample after unmuting is 0), unless stopped."""
        if self._muted:
            self._muted = False
            if not self._stopped:
                self._ramp.rise_from_silence()

    def prepare(self, signal) -> PreparedSignal:
        """Check ``signal`` against this generator and work out its oscillators, for :meth:`change`.

        Reads only the rate and channels, which never change: safe from any thread.

        Raises
        ------
        GeneratorError
            If ``signal`` cannot be played with this generator's rate and channels.
        """
        if isinstance(signal, PreparedSignal):
            if (signal.rate_hz, signal.channels) != (self._rate_hz, self._channels):
                raise GeneratorError(
                    f"signal prepared for {signal.rate_hz:g} Hz, {signal.channels} ch; this generator "
                    f"runs at {self._rate_hz:g} Hz, {self._channels} ch"
                )
            return signal
        return PreparedSignal(signal, self._prepare(signal), self._rate_hz, self._channels)

    def change(self, signal) -> None:
        """Play ``signal`` instead: fade the present one out, then fade the new one in.

        The work of preparing the new signal (for a multitone, finding its peak) is done here,
        in the caller's thread, not while rendering; or beforehand, by passing what
        :meth:`prepare` returned. While muted, stopped or still silent the switch is immediate.
        A second change before the first took effect replaces it.

        Raises
        ------
        GeneratorError
            If ``signal`` cannot be played with this generator's rate and channels; the
            generator then carries on unchanged.
        """
        prepared = self.prepare(signal)
        signal, voice = prepared.signal, prepared.voice
        if self._muted or self._ramp.position <= 0:
            self._install(signal, voice)
            return
        self._pending = (signal, voice)
        self._ramp.fall()

    # -- sweep ----------------------------------------------------------------------------------

    def schedule(self) -> list[SweepStep]:
        """One pass of the sweep now playing: ``(start_sample, end_sample, frequency_hz, settle_end_sample)``.

        Sample indices count output samples from the generator's first; ``end_sample`` is
        excluded; samples before ``settle_end_sample`` are still settling. The sweep repeats
        after the last step.

        Raises
        ------
        GeneratorError
            If the signal playing is not a :class:`Sweep`.
        """
        return self._sweep_plan().schedule()

    def step_at(self, sample_index: int) -> tuple[int, float, bool]:
        """``(step_index, frequency_hz, settled)`` of output sample ``sample_index`` of the sweep playing.

        ``settled`` is False in the first ``settle_s`` of each step: an analysis should discard
        those samples (and any it knows were muted or fading).

        Raises
        ------
        GeneratorError
            If the signal playing is not a :class:`Sweep`, or ``sample_index`` is before it started.
        """
        return self._sweep_plan().step_at(sample_index)

    # -- rendering ------------------------------------------------------------------------------

    def render(self, frames: int) -> np.ndarray:
        """The next ``frames`` samples as a new float64 array of shape (frames, channels).

        Consecutive calls continue the waveform exactly: ``render(a)`` then ``render(b)`` equals
        ``render(a + b)`` to rounding (about 1e-12).
        """
        if isinstance(frames, bool) or not isinstance(frames, (int, np.integer)) or frames < 0:
            raise GeneratorError(f"frames = {frames!r} is out of range; allowed: a whole number >= 0")
        out = np.empty((int(frames), self._channels), dtype=np.float64)
        self.render_into(out)
        return out

    def render_into(self, out: np.ndarray) -> None:
        """Fill a preallocated float64 array of shape (frames, channels) in place with the next samples.

        Same output as :meth:`render`. Only scratch arrays made in the constructor are used, so
        this allocates no sample buffers.

        Notes
        -----
        Real-time use: an audio callback must not compute, allocate or block. A producer thread
        calls ``render_into`` on free slots of a bounded ring buffer, keeping it a few blocks
        ahead; the sound card's callback only copies the oldest ready block into the output
        buffer it is handed (and counts an underrun when none is ready). Control calls
        (:meth:`change`, :meth:`mute`...) come from that producer's side, so they take effect a
        ring's length later; :attr:`sample_index` numbers samples as rendered, which is also
        the order they are played.

        Raises
        ------
        GeneratorError
            If ``out`` is not a writable float64 array of shape (frames, channels).
        """
        if (not isinstance(out, np.ndarray) or out.dtype != np.float64 or out.ndim != 2
                or out.shape[1] != self._channels or not out.flags.writeable):
            shape = getattr(out, "shape", None)
            dtype = getattr(out, "dtype", type(out).__name__)
            raise GeneratorError(
                f"out has shape {shape} and dtype {dtype}; allowed: a writable float64 array "
                f"of shape (frames, {self._channels})"
            )
        done, total = 0, out.shape[0]
        while done < total:
            n = min(total - done, _CHUNK)
            fade = self._ramp.frames_to_end()
            if fade is not None and not self._muted:
                n = min(n, max(1, fade))
                if self._ramp.direction == RISING:
                    self._full_at = self._sample + fade - 1
            if self._plan is not None:
                n = min(n, self._plan.frames_to_boundary(self._sample))
                self._bank.set_frequency(0, self._plan.step_at(self._sample)[1])
            self._render_segment(out[done:done + n])
            done += n
            self._sample += n
            if self._ramp.silent and self._pending is not None:
                self._install(*self._pending)
                if not (self._stopped or self._muted):
                    self._ramp.rise_from_silence()

    def _render_segment(self, out: np.ndarray) -> None:
        n = out.shape[0]
        if self._muted or self._ramp.silent:
            out[...] = 0.0
            self._bank.advance(n)
            return
        mix = self._mix[:n, : self._bank.channels]
        self._bank.render(mix)
        gain = self._gain[:n]
        self._ramp.fill(gain)
        gain *= self._amplitude
        mix *= gain[:, None]
        out[...] = mix  # a mono voice broadcasts to both channels

    # -- internals ------------------------------------------------------------------------------

    def _prepare(self, signal) -> Voice:
        if not isinstance(signal, SIGNAL_TYPES):
            raise GeneratorError(
                f"signal {signal!r} is not a test signal; allowed: Tone, TwoTone, Multitone, Sweep, Quadrature"
            )
        signal.check_rate(self._rate_hz)
        if isinstance(signal, Quadrature) and self._channels != 2:
            raise GeneratorError(
                f"Quadrature needs channels = 2 (I left, Q right); the generator has channels = {self._channels}"
            )
        return voice_for(signal)

    def _install(self, signal, voice: Voice) -> None:
        self._pending = None
        self._signal = signal
        self._signal_start = self._sample
        self._bank = OscillatorBank(voice.frequencies_hz, voice.amplitudes, voice.phases_rad, self._rate_hz, _CHUNK)
        self._amplitude = 10.0 ** (self.level_dbfs / 20.0)
        self._plan = SweepPlan.for_sweep(signal, self._rate_hz, self._sample) if isinstance(signal, Sweep) else None

    def _sweep_plan(self) -> SweepPlan:
        if self._plan is None:
            raise GeneratorError(
                f"schedule and step_at need a Sweep; the generator is playing a {type(self._signal).__name__}"
            )
        return self._plan
