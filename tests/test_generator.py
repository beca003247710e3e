"""The test-signal generator against analytic answers and independent references.

Levels: 0 dBFS is a sine of peak 1.0 (AES17 dBFS definition). Spectra are taken with numpy's FFT
over a whole number of periods (rectangular window, tones on bins: no leakage), phases and
amplitude ratios with scipy.signal.csd as the reference.
"""

from __future__ import annotations

import sys
import types

import numpy as np
import pytest
import scipy.signal
import soundfile as sf
from hypothesis import given, settings
from hypothesis import strategies as st

from rtanalyzer.cli import generate as command
from rtanalyzer.cli.cautions import show_first_run_notice
from rtanalyzer.cli.main import main
from rtanalyzer.generator import (
    Generator,
    GeneratorError,
    Multitone,
    OutputDeviceError,
    Quadrature,
    Sweep,
    Tone,
    TwoTone,
)
from rtanalyzer.generator.oscillator import OscillatorBank
from rtanalyzer.generator.schroeder import periodic_peak, schroeder_phases

RATE = 48000


def amp(dbfs: float) -> float:
    return 10.0 ** (dbfs / 20.0)


def steady(gen: Generator, frames: int) -> np.ndarray:
    """Skip the fade-in (ramp_frames + 1 samples), then return ``frames`` samples."""
    gen.render(gen.ramp_frames + 1)
    return gen.render(frames)


def tone_level_dbfs(x: np.ndarray, f: float, rate: float = RATE) -> float:
    """Level of an on-bin tone: peak amplitude 2|X|/N of a rectangular-window FFT (arithmetic)."""
    spectrum = np.fft.rfft(x)
    k = int(round(f * len(x) / rate))
    return 20 * np.log10(2 * np.abs(spectrum[k]) / len(x))


# -- levels -------------------------------------------------------------------------------------


def test_zero_dbfs_tone_peaks_at_one_with_rms_one_over_root_two():
    # AES17: 0 dBFS is a sine of peak 1.0; the RMS of a sine of peak 1 is 1/sqrt(2) (arithmetic).
    gen = Generator(Tone(1000.0, 0.0), RATE, ceiling_dbfs=0.0)
    x = steady(gen, 4800)[:, 0]  # 100 whole periods; 1 kHz hits its crest every 48 samples
    assert abs(x).max() == pytest.approx(1.0, abs=1e-12)
    assert np.sqrt(np.mean(x**2)) == pytest.approx(1 / np.sqrt(2), abs=1e-12)
    assert gen.level_dbfs == 0.0


@pytest.mark.parametrize("ratio_db", [0.0, -10.0])
def test_two_tone_pep_is_the_level_and_tones_share_it(ratio_db):
    # PEP of tones of peak A1, A2 is A1 + A2; equal tones each sit 20*log10(2) = 6.02 dB below it
    # (arithmetic). 700 and 1900 Hz are in phase at t = 0 and every 10 ms (480 samples).
    level = -6.0
    gen = Generator(TwoTone(700.0, 1900.0, level, ratio_db=ratio_db), RATE)
    x = steady(gen, 4800)[:, 0]
    assert abs(x).max() <= amp(level) + 1e-12
    assert x[480 - (gen.ramp_frames + 1) % 480] == pytest.approx(amp(level), abs=1e-12)
    low, high = tone_level_dbfs(x, 700.0), tone_level_dbfs(x, 1900.0)
    assert high - low == pytest.approx(ratio_db, abs=1e-6)
    assert 20 * np.log10(10 ** (low / 20) + 10 ** (high / 20)) == pytest.approx(level, abs=1e-6)
    if ratio_db == 0.0:
        assert low == pytest.approx(level - 20 * np.log10(2), abs=1e-6)


def test_ceiling_clamps_the_level_not_the_samples():
    # A clamped sine is still a sine (no flat tops): its spectrum holds no harmonics (arithmetic).
    gen = Generator(Tone(1000.0, 0.0), RATE, ceiling_dbfs=-6.0)
    x = steady(gen, 4800)[:, 0]
    assert gen.level_dbfs == -6.0
    assert abs(x).max() == pytest.approx(amp(-6.0), abs=1e-12)
    assert tone_level_dbfs(x, 3000.0) < -250
    quiet = Generator(Tone(1000.0, -10.0), RATE, ceiling_dbfs=-6.0)
    assert quiet.level_dbfs == -10.0
    assert abs(steady(quiet, 480)).max() == pytest.approx(amp(-10.0), abs=1e-12)


# -- multitone ----------------------------------------------------------------------------------


def test_schroeder_multitone_has_low_crest_factor_and_a_flat_spectrum():
    # N equal tones in phase have crest factor N / sqrt(N/2) = sqrt(2N) (arithmetic); Schroeder
    # phases (Schroeder 1970) bring it far below that.
    n = 32
    freqs = tuple(100.0 * k for k in range(1, n + 1))  # period 10 ms = 480 samples
    gen = Generator(Multitone(freqs, -3.0), RATE)
    x = steady(gen, 4800)[:, 0]
    one_period = x[:480]
    crest = abs(one_period).max() / np.sqrt(np.mean(one_period**2))
    t = np.arange(480) / RATE
    zero_phase = np.sum([np.cos(2 * np.pi * f * t) for f in freqs], axis=0)
    zero_crest = abs(zero_phase).max() / np.sqrt(np.mean(zero_phase**2))
    assert zero_crest == pytest.approx(np.sqrt(2 * n), rel=1e-9)
    assert crest < 0.3 * zero_crest
    levels = np.array([tone_level_dbfs(x, f) for f in freqs])
    assert np.ptp(levels) < 1e-9  # equal amplitudes
    # each tone at the waveform's peak level less its crest over one tone (20*log10(peak/a))
    assert abs(x).max() <= amp(-3.0) + 1e-12


def test_multitone_peak_is_found_exactly():
    # Reference: brute-force evaluation of the waveform on 2**21 points per period, where the
    # waveform cannot move by more than (h**2/8)*sum(a*w**2) between points (Taylor, arithmetic).
    harmonics = np.array([3, 5, 7, 11, 13, 17, 19, 23])
    phases = schroeder_phases(len(harmonics))
    s = np.arange(2**21) / 2**21
    x = np.zeros_like(s)
    for m, p in zip(harmonics, phases):
        x += np.cos(2 * np.pi * m * s + p)
    brute = abs(x).max()
    bound = (1 / 2**21) ** 2 / 8 * np.sum((2 * np.pi * harmonics) ** 2)
    peak = periodic_peak(harmonics, np.ones(len(harmonics)), phases)
    assert brute - 1e-12 <= peak <= brute + bound + 1e-12


def test_multitone_level_is_the_waveform_peak():
    # The scaled waveform's own peak (from its harmonics, independent of the rate) equals the level.
    mt = Multitone.spread(300.0, 3000.0, 12, -10.0)
    gen = Generator(mt, RATE)
    x = steady(gen, RATE)[:, 0]  # one second: many periods, samples come close to the crest
    assert abs(x).max() <= amp(-10.0) + 1e-12
    assert 20 * np.log10(abs(x).max()) > -10.2


def test_schroeder_phases_follow_the_published_law():
    # Schroeder 1970: phi_k = -pi*k*(k-1)/N (k = 1..N), compared modulo 2*pi.
    n = 7
    k = np.arange(1, n + 1)
    diff = np.angle(np.exp(1j * (schroeder_phases(n) + np.pi * k * (k - 1) / n)))
    assert np.allclose(diff, 0.0, atol=1e-12)


def test_spread_spacing():
    # Log spacing has a constant ratio, linear a constant difference (arithmetic).
    log = Multitone.spread(100.0, 10000.0, 5, -6.0, grid_hz=0.5).frequencies_hz
    assert log == (100.0, 316.0, 1000.0, 3162.5, 10000.0)  # 100 * 10**(k/2) rounded to 0.5 Hz
    assert Multitone.spread(300.0, 3000.0, 4, -6.0, spacing="linear").frequencies_hz == (300, 1200, 2100, 3000)


# -- quadrature ---------------------------------------------------------------------------------


@pytest.mark.parametrize("amplitude_db,offset_deg", [(0.0, 0.0), (0.5, 1.3), (-0.2, -2.5)])
def test_quadrature_phase_and_amplitude_by_cross_spectrum(amplitude_db, offset_deg):
    # I = A cos(wt), Q = A g sin(wt + phi) = A g cos(wt + phi - 90 deg): the cross spectrum
    # conj(I)*Q has angle phi - 90 deg, i.e. I leads Q by 90 deg - phi (trigonometry; measured
    # with scipy.signal.csd as the reference); sqrt(Pqq/Pii) = g.
    gen = Generator(Quadrature(1000.0, -6.0, amplitude_db, offset_deg), RATE, channels=2)
    x = steady(gen, 4800 * 4)
    f, pxy = scipy.signal.csd(x[:, 0], x[:, 1], fs=RATE, nperseg=4800)
    _, pxx = scipy.signal.welch(x[:, 0], fs=RATE, nperseg=4800)
    _, pyy = scipy.signal.welch(x[:, 1], fs=RATE, nperseg=4800)
    k = int(np.argmin(abs(f - 1000.0)))
    assert np.degrees(np.angle(pxy[k])) == pytest.approx(offset_deg - 90.0, abs=0.01)
    assert 10 * np.log10(pyy[k] / pxx[k]) == pytest.approx(amplitude_db, abs=0.01)
    # the louder channel peaks at the level (AES17); samples fall at most half a sample from the
    # crest, so they reach at least cos(pi*f/fs) of it (arithmetic)
    assert amp(-6.0) * np.cos(np.pi * 1000.0 / RATE) <= abs(x).max() <= amp(-6.0) + 1e-12


def test_mono_signal_fills_both_channels_alike():
    x = Generator(Tone(1000.0, -6.0), RATE, channels=2).render(1000)
    assert np.array_equal(x[:, 0], x[:, 1])


# -- sweep --------------------------------------------------------------------------------------


def test_sweep_schedule_and_step_at():
    # Sample arithmetic: 0.1 s dwell = 4800 samples, 0.02 s settle = 960 samples at 48 kHz.
    sweep = Sweep((1000.0, 2000.0, 3000.0), -6.0, dwell_s=0.1, settle_s=0.02)
    gen = Generator(sweep, RATE)
    assert gen.schedule() == [
        (0, 4800, 1000.0, 960),
        (4800, 9600, 2000.0, 5760),
        (9600, 14400, 3000.0, 10560),
    ]
    assert gen.step_at(0) == (0, 1000.0, False)
    assert gen.step_at(959) == (0, 1000.0, False)
    assert gen.step_at(960) == (0, 1000.0, True)
    assert gen.step_at(4799) == (0, 1000.0, True)
    assert gen.step_at(4800) == (1, 2000.0, False)
    assert gen.step_at(14400 + 5800) == (1, 2000.0, True)  # the sweep repeats
    x = gen.render(14400)[:, 0]
    for start, end, f, settle_end in gen.schedule():
        assert tone_level_dbfs(x[settle_end : settle_end + 3840], f) == pytest.approx(-6.0, abs=1e-6)
    # phase runs on across steps: no jump bigger than the fastest step's 2*A*sin(pi*f/fs) (arithmetic)
    assert abs(np.diff(x)).max() <= 2 * amp(-6.0) * np.sin(np.pi * 3000.0 / RATE) + 1e-12


def test_sweep_log_range_and_schedule_after_change():
    sweep = Sweep.log_range(100.0, 10000.0, 3, -6.0, dwell_s=0.05, settle_s=0.01)
    assert sweep.frequencies_hz == pytest.approx((100.0, 1000.0, 10000.0))
    gen = Generator(Tone(500.0, -6.0), RATE)
    with pytest.raises(GeneratorError, match="need a Sweep; the generator is playing a Tone"):
        gen.step_at(0)
    gen.render(1000)
    gen.change(sweep)
    gen.render(2000)  # 480-sample fade out, then the sweep starts
    start = gen.schedule()[0].start_sample
    assert start == 1000 + gen.ramp_frames
    assert gen.step_at(start) == (0, 100.0, False)
    with pytest.raises(GeneratorError, match="before the sweep started"):
        gen.step_at(start - 1)


# -- fades, mute, change ------------------------------------------------------------------------


def envelope(gen: Generator, frames: int) -> np.ndarray:
    """|I + jQ| of an unimpaired quadrature pair: A times the gain, sample by sample (cos^2 + sin^2 = 1)."""
    x = gen.render(frames)
    return np.hypot(x[:, 0], x[:, 1])


def test_start_ramp_is_a_monotone_raised_cosine_reaching_the_level_after_ramp_s():
    # Raised cosine (Hann half-window) 0.5 - 0.5*cos(pi*n/R), R = ramp_s*rate (arithmetic).
    gen = Generator(Quadrature(1000.0, -6.0), RATE, channels=2, ramp_s=0.01)
    r = 480
    e = envelope(gen, 1000) / amp(-6.0)
    assert e[0] == 0.0
    assert np.all(np.diff(e[: r + 1]) > 0)
    assert np.allclose(e[: r + 1], 0.5 - 0.5 * np.cos(np.pi * np.arange(r + 1) / r), atol=1e-12)
    assert np.allclose(e[r:], 1.0, atol=1e-12)


def test_stop_ramps_out_then_silence():
    gen = Generator(Quadrature(1000.0, -6.0), RATE, channels=2)
    gen.render(2000)
    gen.stop()
    e = envelope(gen, 1000) / amp(-6.0)
    # the fade out mirrors the fade in: gains (R-1..0) of 0.5 - 0.5*cos(pi*p/R) (arithmetic)
    assert np.allclose(e[:480], 0.5 - 0.5 * np.cos(np.pi * np.arange(479, -1, -1) / 480), atol=1e-12)
    assert np.all(np.diff(e[:480]) < 0)
    assert np.all(e[479:] == 0.0)
    assert gen.silent
    gen.start()
    e = envelope(gen, 600)
    assert e[0] == 0.0 and e[480] == pytest.approx(amp(-6.0), abs=1e-12)


def test_mute_is_instant_and_unmute_ramps_in():
    gen = Generator(Tone(1000.0, -6.0), RATE)
    gen.render(1000)
    gen.mute()
    assert np.all(gen.render(500) == 0.0)
    gen.unmute()
    x = gen.render(1000)[:, 0]
    assert x[0] == 0.0
    assert abs(x[:100]).max() < 0.5 * amp(-6.0)  # still fading in
    assert abs(x[480:]).max() == pytest.approx(amp(-6.0), abs=1e-12)


def max_step(signal, channels=1) -> float:
    x = steady(Generator(signal, RATE, channels=channels), 4800)
    return float(abs(np.diff(x, axis=0)).max())


@pytest.mark.parametrize(
    "old,new",
    [
        (Tone(2000.0, -3.0), TwoTone(500.0, 700.0, -10.0)),
        (Multitone.spread(200.0, 2000.0, 8, -6.0), Tone(1000.0, -3.0)),
    ],
)
def test_change_makes_no_click(old, new):
    # A click is a sample-to-sample step beyond what the steady signals make (common practice,
    # no source): the transition must stay within the larger steady-state step.
    limit = max(max_step(old), max_step(new))
    gen = Generator(old, RATE)
    before = gen.render(2000)
    gen.change(new)
    during = gen.render(3000)
    x = np.concatenate([before, during])[:, 0]
    assert abs(np.diff(x)).max() <= limit + 1e-12
    assert gen.signal == new
    assert abs(x).max() <= max(amp(old.level_dbfs), amp(new.level_dbfs)) + 1e-12


def test_start_does_not_undo_a_pending_change():
    gen = Generator(Tone(1000.0, -6.0), RATE)
    gen.render(1000)
    gen.change(Tone(2000.0, -6.0))
    gen.render(100)
    gen.start()  # not stopped: no effect, the change goes on
    x = gen.render(2000)[1500:, 0]
    assert gen.signal == Tone(2000.0, -6.0)
    assert tone_level_dbfs(x[:480], 2000.0) == pytest.approx(-6.0, abs=1e-6)


def test_signal_start_and_steady_from_date_each_fade():
    # Where the signal began and from which sample its gain is 1, checked against the envelope of
    # an unimpaired quadrature pair (|I + jQ| = A * gain, cos^2 + sin^2 = 1).
    first, second = Quadrature(1000.0, -6.0), Quadrature(1500.0, -6.0)
    gen = Generator(first, RATE, channels=2)
    r = gen.ramp_frames
    assert (gen.signal_start, gen.steady_from) == (0, r)
    e = envelope(gen, 2000) / amp(-6.0)
    assert e[r] == pytest.approx(1.0, abs=1e-12) and e[r - 1] < 1.0 - 1e-6
    assert gen.steady_from == r  # reached inside the block: still the exact sample
    gen.change(second)  # at sample 2000: fade out, then in
    assert gen.steady_from is None and gen.signal_start == 0
    e = envelope(gen, 3000) / amp(-6.0)
    assert gen.signal == second and gen.signal_start == 2000 + r
    assert gen.steady_from == 2000 + 2 * r
    assert e[r] == 0.0 and e[2 * r] == pytest.approx(1.0, abs=1e-12) and e[2 * r - 1] < 1.0 - 1e-6
    gen.mute()
    assert gen.steady_from is None
    gen.render(100)
    gen.unmute()
    assert gen.steady_from == 5100 + r
    gen.stop()
    assert gen.steady_from is None
    assert gen.sweep_plan is None


def test_start_right_after_stop_keeps_playing():
    # Stop and start with no sample rendered between: the fade out never began, so the output
    # stays at full level (it used to keep falling to silence, and stay there).
    gen = Generator(Tone(1000.0, -6.0), RATE)
    gen.render(2000)
    gen.stop()
    gen.start()
    x = gen.render(2000)[:, 0]
    assert not gen.silent and gen.steady_from == 480
    assert tone_level_dbfs(x[-480:], 1000.0) == pytest.approx(-6.0, abs=1e-9)


def test_prepare_then_change_equals_change():
    signal = Multitone.spread(300.0, 3000.0, 6, -6.0)
    a, b = Generator(Tone(1000.0, -6.0), RATE), Generator(Tone(1000.0, -6.0), RATE)
    a.render(1000), b.render(1000)
    prepared = b.prepare(signal)
    assert prepared.signal is signal and b.signal == Tone(1000.0, -6.0)  # preparing changes nothing
    a.change(signal)
    b.change(prepared)
    np.testing.assert_array_equal(a.render(3000), b.render(3000))
    with pytest.raises(GeneratorError) as err:
        Generator(Tone(1000.0, -6.0), 44100).change(prepared)
    assert str(err.value) == "signal prepared for 48000 Hz, 1 ch; this generator runs at 44100 Hz, 1 ch"
    with pytest.raises(GeneratorError, match="Quadrature needs channels = 2"):
        a.prepare(Quadrature(1000.0, -6.0))


def test_sweep_plan_starts_with_the_sweep():
    gen = Generator(Tone(1000.0, -6.0), RATE)
    gen.render(1000)
    gen.change(Sweep((500.0, 1500.0), -6.0, 0.01, 0.002))
    gen.render(2000)
    assert gen.sweep_plan.start_sample == gen.signal_start == 1480
    assert gen.step_at(1480 + 480) == gen.sweep_plan.step_at(1480 + 480) == (1, 1500.0, False)


def test_blocks_join_exactly():
    # Phase continuity: the same samples whatever the block boundaries (to rounding, 1e-12).
    for signal in (TwoTone(700.0, 1900.0, -6.0), Sweep((500.0, 1500.0), -6.0, 0.01, 0.002),
                   Multitone.spread(300.0, 3000.0, 6, -6.0)):
        whole = Generator(signal, RATE).render(9000)
        g = Generator(signal, RATE)
        parts = np.concatenate([g.render(n) for n in (1, 479, 3000, 0, 5000, 520)])
        assert np.allclose(parts, whole, rtol=0, atol=1e-12)
        out = np.empty((9000, 1))
        Generator(signal, RATE).render_into(out)
        assert np.allclose(out, whole, rtol=0, atol=1e-12)


def test_phase_stays_accurate_over_hours():
    # 20000 one-second blocks (5.6 h) of a 1000.1 Hz oscillator: n*f/fs cycles = 20002000 exactly,
    # so the wrapped phase must return to 0 (arithmetic). What remains is the 2**-53 relative
    # rounding of the increment f/fs (2e7 cycles * 1.1e-16 = 2.2e-9 cycles): allow 1e-7 rad.
    bank = OscillatorBank([1000.1], [[1.0]], [[-np.pi / 2]], RATE, block=8)  # sin: reads the phase
    for _ in range(20000):
        bank.advance(RATE)
    out = np.empty((1, 1))
    bank.render(out)
    assert abs(out[0, 0]) < 1e-7


_SIGNALS = [
    Tone(1000.0, -1.0),
    TwoTone(700.0, 1900.0, -3.0, ratio_db=4.0),
    Multitone.spread(300.0, 3000.0, 10, -2.0),
    Sweep((400.0, 2500.0), -4.0, 0.004, 0.001),
    Tone(15000.0, 0.0),
]
_ACTIONS = st.lists(
    st.tuples(st.sampled_from(["render", "mute", "unmute", "stop", "start", "change"]),
              st.integers(0, 1500), st.integers(0, len(_SIGNALS) - 1)),
    max_size=12,
)


@settings(max_examples=30, deadline=None)
@given(start=st.integers(0, len(_SIGNALS) - 1), actions=_ACTIONS)
def test_no_block_ever_exceeds_the_level(start, actions):
    # Property (measurement conventions: never exceed the set level): every block's peak is at
    # most the louder level in play, never NaN.
    gen = Generator(_SIGNALS[start], RATE, ramp_s=0.002, ceiling_dbfs=-0.5)
    allowed = gen.level_dbfs
    for action, frames, which in actions:
        if action == "render":
            block = gen.render(frames)
            assert np.all(np.isfinite(block))
            assert block.size == 0 or abs(block).max() <= amp(allowed) + 1e-12
            allowed = gen.level_dbfs
        elif action == "change":
            gen.change(_SIGNALS[which])
            allowed = max(allowed, gen.level_dbfs, min(_SIGNALS[which].level_dbfs, -0.5))
        else:
            getattr(gen, action)()


# -- validation ---------------------------------------------------------------------------------


@pytest.mark.parametrize(
    "make,pattern",
    [
        (lambda: Tone(-5.0, -6.0), r"Tone frequency_hz = -5\.0 is out of range; allowed: a finite frequency_hz > 0 Hz"),
        (lambda: Tone(1000.0, 3.0), r"Tone level_dbfs = 3\.0 .*allowed: -120 <= level_dbfs <= 0 dBFS"),
        (lambda: Tone(float("nan"), -6.0), r"Tone frequency_hz = nan"),
        (lambda: TwoTone(1900.0, 700.0, -6.0), r"TwoTone high_hz = 700 Hz must be above low_hz = 1900 Hz"),
        (lambda: Multitone((100.0, 100.0), -6.0), r"strictly increasing"),
        (lambda: Multitone((1000.0, 1000.0 * 2**0.5), -6.0), r"share no common spacing"),
        (lambda: Sweep((1000.0,), -6.0, 0.1, 0.2), r"Sweep settle_s = 0\.2 .*settle_s < 0\.1 s"),
        (lambda: Quadrature(1000.0, -6.0, phase_offset_deg=200.0), r"phase_offset_deg = 200\.0 .*-180"),
        (lambda: Generator(Tone(30000.0, -6.0), RATE), r"frequency_hz = 30000 Hz is at or above Nyquist \(24000 Hz"),
        (lambda: Generator(Quadrature(1000.0, -6.0), RATE), r"Quadrature needs channels = 2"),
        (lambda: Generator(Tone(1000.0, -6.0), RATE, channels=3), r"channels = 3 .*allowed: 1 or 2"),
        (lambda: Generator(Tone(1000.0, -6.0), RATE, ceiling_dbfs=1.0), r"ceiling_dbfs = 1\.0 .*-120 to 0 dBFS"),
        (lambda: Generator(Tone(1000.0, -6.0), RATE).render_into(np.zeros((10, 2))), r"shape \(10, 2\)"),
    ],
)
def test_errors_name_parameter_value_and_range(make, pattern):
    with pytest.raises(GeneratorError, match=pattern) as info:
        make()
    assert "\n" not in str(info.value)


# -- command line -------------------------------------------------------------------------------


@pytest.fixture
def cautions_seen():
    """Mark the first-run cautions as shown, so stderr holds only what the command says."""
    import io

    show_first_run_notice(io.StringIO())


def test_cli_writes_a_wav_that_reads_back(tmp_path, capsys, cautions_seen):
    # 1102.5 Hz at 44.1 kHz repeats every 40 samples and hits its crest: peak = level (AES17),
    # within half a 24-bit step (quantization, arithmetic).
    out = tmp_path / "tone.wav"
    code = main(["generate", "tone", "--freq", "1102.5", "--level-dbfs", "-6", "--rate", "44100",
                 "--seconds", "0.5", "--out", str(out)])
    assert code == 0
    lines = capsys.readouterr().out.splitlines()
    assert len(lines) == 1 and lines[0].startswith(f"wrote {out}: tone 1102.5 Hz at -6 dBFS peak")
    data, rate = sf.read(str(out), always_2d=True)
    info = sf.info(str(out))
    assert rate == 44100 and data.shape == (22050, 1) and info.subtype == "PCM_24"
    assert abs(data).max() == pytest.approx(amp(-6.0), abs=2.0**-24)
    assert data[0, 0] == 0.0 and data[-1, 0] == 0.0  # starts and ends faded


def test_cli_writes_a_stereo_quadrature_wav(tmp_path, capsys, cautions_seen):
    out = tmp_path / "iq.wav"
    assert main(["generate", "quadrature", "--freq", "1000", "--amplitude-db", "0.5", "--seconds", "0.2",
                 "--subtype", "FLOAT", "--out", str(out)]) == 0
    data, rate = sf.read(str(out), always_2d=True)
    assert rate == 48000 and data.shape == (9600, 2)
    assert abs(data[:, 1]).max() == pytest.approx(amp(-6.0), abs=1e-6)  # Q is the louder channel
    assert abs(data[:, 0]).max() == pytest.approx(amp(-6.5), abs=1e-6)


def test_cli_sweep_lasts_one_pass_by_default(tmp_path, capsys, cautions_seen):
    out = tmp_path / "sweep.wav"
    assert main(["generate", "sweep", "--start", "200", "--stop", "2000", "--steps", "3", "--dwell", "0.1",
                 "--settle", "0.02", "--out", str(out)]) == 0
    assert sf.info(str(out)).frames == 3 * 4800


@pytest.mark.parametrize(
    "argv,pattern",
    [
        (["generate", "tone", "--tones", "700", "1900", "--out", "x.wav"], "--tones applies to twotone"),
        (["generate", "tone", "--freq", "30000", "--out", "x.wav"], "--freq: .*above Nyquist"),
        (["generate", "tone", "--level-dbfs", "3", "--out", "x.wav"], "--level-dbfs: level_dbfs = 3.0"),
        (["generate", "multitone", "--count", "1", "--out", "x.wav"], "--count: count = 1"),
        (["generate", "sweep", "--settle", "1", "--out", "x.wav"], "--settle: settle_s = 1.0"),
        (["generate", "tone", "--seconds", "0.001", "--out", "x.wav"], "--seconds 0.001 is out of range"),
        (["generate", "tone", "--out", "x.mp3"], "ending in .wav or .flac"),
        (["generate", "tone"], "one of the arguments --out --device is required"),
        (["generate", "noise", "--out", "x.wav"], "invalid choice"),
    ],
)
def test_cli_bad_arguments_exit_2_with_one_line(argv, pattern, capsys, cautions_seen, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    assert main(argv) == 2
    captured = capsys.readouterr()
    lines = captured.err.splitlines()
    assert len(lines) == 1 and lines[0].startswith("rtanalyzer: error:")
    assert __import__("re").search(pattern, lines[0])
    assert not (tmp_path / "x.wav").exists()


def _play_args(device="speakers"):
    import argparse

    parser = argparse.ArgumentParser()
    command.add_parser(parser.add_subparsers(dest="command"))
    return parser.parse_args(["generate", "tone", "--seconds", "0.1", "--device", device])


def test_device_needs_sounddevice(monkeypatch):
    monkeypatch.setitem(sys.modules, "sounddevice", None)  # import fails with ImportError
    with pytest.raises(OutputDeviceError, match="pip install sounddevice"):
        command.run(_play_args())


def test_device_needs_portaudio(monkeypatch):
    class NoPortAudio:
        def find_spec(self, name, path=None, target=None):
            if name == "sounddevice":
                raise OSError("PortAudio library not found")
            return None

    monkeypatch.delitem(sys.modules, "sounddevice", raising=False)
    monkeypatch.setattr(sys, "meta_path", [NoPortAudio(), *sys.meta_path])
    with pytest.raises(OutputDeviceError, match="apt-get install libportaudio2"):
        command.run(_play_args())


def _fake_sounddevice(play_error=None):
    fake = types.ModuleType("sounddevice")

    class PortAudioError(Exception):
        pass

    devices = [
        {"index": 0, "name": "Line In", "max_output_channels": 0},
        {"index": 1, "name": "USB Audio CODEC", "max_output_channels": 2},
        {"index": 2, "name": "HDMI 0", "max_output_channels": 8},
    ]

    def query_devices(device=None, kind=None):
        if device is None:
            return devices
        found = [d for d in devices if d["max_output_channels"] and (device == d["index"] or str(device) in d["name"])]
        if not found:
            raise ValueError(f"No output device matching {device!r}")
        return found[0]

    def play(data, samplerate=None, device=None, blocking=False):
        fake.played = (data.shape, samplerate, device)
        if play_error:
            raise PortAudioError(play_error)

    fake.PortAudioError = PortAudioError
    fake.query_devices = query_devices
    fake.play = play
    fake.stop = lambda: None
    return fake


def test_unknown_device_lists_the_output_devices(monkeypatch):
    monkeypatch.setitem(sys.modules, "sounddevice", _fake_sounddevice())
    with pytest.raises(OutputDeviceError) as info:
        command.run(_play_args("speakers"))
    text = str(info.value)
    assert "No output device matching 'speakers'" in text
    assert "1 'USB Audio CODEC'; 2 'HDMI 0'" in text and "Line In" not in text
    assert "\n" not in text


def test_device_plays_and_maps_portaudio_errors(monkeypatch, capsys):
    fake = _fake_sounddevice()
    monkeypatch.setitem(sys.modules, "sounddevice", fake)
    assert command.run(_play_args("USB")) == 0
    assert fake.played == ((4800, 1), 48000, "USB")
    assert capsys.readouterr().out.startswith("played on USB Audio CODEC: tone 1000 Hz")
    monkeypatch.setitem(sys.modules, "sounddevice", _fake_sounddevice("Invalid sample rate\n[PaErrorCode -9997]"))
    with pytest.raises(OutputDeviceError, match=r"cannot play 48000 Hz 1-channel audio: Invalid sample rate") as info:
        command.run(_play_args("2"))
    assert "\n" not in str(info.value)


def test_a_fall_taken_back_before_it_begins_holds_full_gain():
    # At full gain, fall() then rise() with no sample between: the gain stays 1 (arithmetic of the
    # raised-cosine ramp, 0.5 - 0.5·cos(π·p/R) at p = R).
    from rtanalyzer.generator.envelope import RaisedCosineRamp

    ramp = RaisedCosineRamp(8, block=32)
    ramp.rise_from_silence()
    ramp.fill(np.empty(20))
    ramp.fall()
    ramp.rise()
    gain = np.empty(10)
    ramp.fill(gain)
    assert np.all(gain == 1.0)
