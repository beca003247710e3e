"""Phase-network analysis (`analyze quadrature`): phase difference, amplitude ratio, predicted suppression.

Captures are synthesised here from first principles (cosines with known phases and amplitudes,
or a network applied as its exact frequency response), written with soundfile directly.
"""

from __future__ import annotations

import io
import json

import numpy as np
import pytest
import scipy.signal
import soundfile as sf

from conftest import write_wav
from conftest import run_cli as run
from rtanalyzer.cli.progress import terminal_progress
from rtanalyzer.dsp.quadrature import image_rejection_db, pair_phasors, wrap_deg
from rtanalyzer.errors import MeasurementError
from rtanalyzer.generator import Generator, Multitone, Sweep
from rtanalyzer.measurements.quadrature import QuadratureMeasurement, measure_quadrature
from rtanalyzer.sources.bench.truth import image_rejection_db as bench_image_rejection_db
from rtanalyzer.sources.capture import Signal

RATE = 48000


@pytest.fixture(autouse=True)
def _quiet(cautions_already_shown):
    """Every CLI call here runs as a user who has already seen the first-run notice."""


def q16(x):
    """16-bit quantisation, as a clean sound card records."""
    return np.round(np.clip(x, -1, 1 - 2**-15) * 2**15) / 2**15


def pair(freqs, diff_deg, ratio_db, seconds=2.0, level=0.4, seed=0, quantize=True):
    """Left = sum of cosines; right lags each by diff_deg and is ratio_db louder or softer."""
    rng = np.random.default_rng(seed)
    t = np.arange(int(seconds * RATE)) / RATE
    left = np.zeros_like(t)
    right = np.zeros_like(t)
    g = 10 ** (np.asarray(ratio_db, dtype=float) / 20)
    for k, f in enumerate(np.atleast_1d(freqs)):
        p = rng.uniform(0, 2 * np.pi)
        d = np.radians(np.atleast_1d(diff_deg)[k % np.size(diff_deg)])
        gk = np.atleast_1d(g)[k % np.size(g)]
        left += level * np.cos(2 * np.pi * f * t + p)
        right += level * gk * np.cos(2 * np.pi * f * t + p - d)
    if quantize:
        left, right = q16(left), q16(right)
    return left, right


def signal_of(left, right):
    return Signal(left + 1j * right, float(RATE), label="stereo")


# ---- the image-rejection relation ---------------------------------------------------------


@pytest.mark.parametrize(
    "ratio_db,eps_deg,expected",
    [
        (0.0, 1.0, 41.2),  # Razavi, RF Microelectronics (image-reject relation); check value in conventions
        (0.0, 1.8, 36.1),  # same relation, conventions check value
        (0.1, 0.0, 44.8),  # same relation, conventions check value
        (0.1, 1.0, 39.6),  # same relation, conventions check value
    ],
)
def test_image_rejection_check_values(ratio_db, eps_deg, expected):
    got = float(image_rejection_db(10 ** (ratio_db / 20), np.radians(eps_deg)))
    assert got == pytest.approx(expected, abs=0.05)
    # The bench's own copy of the relation agrees (independent code path in sources/bench).
    assert got == pytest.approx(float(bench_image_rejection_db(10 ** (ratio_db / 20), np.radians(eps_deg))), abs=1e-9)


def test_time_view_of_phase_quarter_periods():
    # A quarter period of 1 kHz is 250 µs, of 2 kHz 125 µs (arithmetic).
    left, right = pair([1000.0, 2000.0], 90.0, 0.0)
    r = measure_quadrature(signal_of(left, right))
    assert [p.time_offset_us for p in r.points] == pytest.approx([250.0, 125.0], abs=0.01)


def test_five_microseconds_at_1khz_is_1_8_degrees_and_about_36_db():
    # 5 µs at 1 kHz = 1.8 degrees (arithmetic); 1.8 degrees -> about 36 dB (common practice; relation gives 36.1).
    diff = 90.0 + 360.0 * 1000.0 * 5e-6
    left, right = pair(1000.0, diff, 0.0)
    p = measure_quadrature(signal_of(left, right)).points[0]
    assert p.phase_error_deg == pytest.approx(1.8, abs=0.02)
    assert p.time_offset_us - 250.0 == pytest.approx(5.0, abs=0.06)
    assert p.predicted_suppression_db == pytest.approx(36.1, abs=0.1)


def test_wrap_to_half_open_interval():
    # (-180, 180]: -180 maps to +180 (definition in the issue).
    assert list(wrap_deg([-180.0, 190.0, -190.0, 540.0])) == [180.0, -170.0, 170.0, 180.0]


# ---- accuracy -----------------------------------------------------------------------------


def test_accuracy_at_1khz_clean_16_bit_two_seconds():
    # Targets: phase difference +/-0.02 degrees, amplitude ratio +/-0.01 dB (the targets).
    rng = np.random.default_rng(7)
    for seed in range(6):
        diff = rng.uniform(80.0, 100.0) * rng.choice([-1, 1])
        ratio = rng.uniform(-1.0, 1.0)
        f = 1000.0 + rng.uniform(-0.5, 0.5)  # off any bin centre
        left, right = pair(f, diff, ratio, seconds=2.0, level=rng.uniform(0.05, 0.9), seed=seed)
        p = measure_quadrature(signal_of(left, right)).points[0]
        assert p.phase_difference_deg == pytest.approx(diff, abs=0.02)
        assert p.amplitude_ratio_db == pytest.approx(ratio, abs=0.01)
        assert p.phase_uncertainty_deg < 0.01  # our noise-based figure says so too


def test_phase_agrees_with_scipy_csd():
    # Reference: scipy.signal.csd (Welch cross-spectral density); its phase at the tone's bin is
    # angle(conj(L) R) = phase(R) - phase(L). The tone sits on a bin centre so the reference is unbiased.
    nper = 4800
    f = 100 * RATE / nper  # 1000 Hz, bin 100
    left, right = pair(f, 87.3, 0.3, seconds=2.0, seed=3)
    noise = np.random.default_rng(3).normal(0, 1e-4, (2, left.size))
    left, right = left + noise[0], right + noise[1]
    freqs, pxy = scipy.signal.csd(left, right, fs=RATE, nperseg=nper, window="hann")
    k = int(np.argmin(np.abs(freqs - f)))
    reference = -np.degrees(np.angle(pxy[k]))
    p = measure_quadrature(signal_of(left, right)).points[0]
    assert p.phase_difference_deg == pytest.approx(reference, abs=0.02)
    assert p.phase_difference_deg == pytest.approx(87.3, abs=0.02)


def allpass_deg(f, chain):
    """First-order all-pass phase, -2*atan(2*pi*f*R*C) per section (textbook circuit theory)."""
    return sum(np.degrees(-2 * np.arctan(2 * np.pi * f * r * c)) for r, c in chain)


I_CHAIN = ((1_200.0, 10e-9), (7_500.0, 10e-9), (22_000.0, 10e-9), (68_000.0, 10e-9))
Q_CHAIN = ((3_900.0, 10e-9), (13_000.0, 10e-9), (36_000.0, 10e-9), (220_000.0, 10e-9))


def through_network(x, gain_q=1.0):
    """The network applied as its exact frequency response (all-pass: unit gain, phase per section)."""
    spectrum = np.fft.rfft(x)
    f = np.fft.rfftfreq(x.size, 1 / RATE)
    left = np.fft.irfft(spectrum * np.exp(1j * np.radians(allpass_deg(f, I_CHAIN))), x.size)
    right = np.fft.irfft(spectrum * gain_q * np.exp(1j * np.radians(allpass_deg(f, Q_CHAIN))), x.size)
    return q16(left), q16(right)


def test_schroeder_multitone_through_an_rc_network():
    # One capture, 16 Schroeder-phased tones (Schroeder 1970) 200-3500 Hz through the example
    # network: each point's phase difference matches -2*atan(wRC) summed per chain.
    x = Generator(Multitone.spread(200.0, 3500.0, 16, -3.0), RATE).render(2 * RATE)[:, 0]
    left, right = through_network(x, gain_q=10 ** (-0.05 / 20))
    r = measure_quadrature(signal_of(left, right), band_hz=(300.0, 3000.0))
    f = np.array([p.frequency_hz for p in r.points])
    assert f == pytest.approx(np.array(Multitone.spread(200.0, 3500.0, 16, -3.0).frequencies_hz), abs=0.05)
    truth = allpass_deg(f, I_CHAIN) - allpass_deg(f, Q_CHAIN)
    assert [p.phase_difference_deg for p in r.points] == pytest.approx(list(truth), abs=0.02)
    assert [p.amplitude_ratio_db for p in r.points] == pytest.approx([-0.05] * len(f), abs=0.01)
    expected = image_rejection_db(10 ** (-0.05 / 20), np.radians(np.abs(truth) - 90))
    inside = (f >= 300) & (f <= 3000)
    worst = r.to_json()["band"]
    assert worst["worst_predicted_suppression_db"] == pytest.approx(float(expected[inside].min()), abs=0.05)
    assert worst["worst_frequency_hz"] == pytest.approx(float(f[inside][np.argmin(expected[inside])]), abs=0.1)


def test_stepped_sweep_gives_one_point_per_step():
    sweep = Sweep.log_range(300.0, 3000.0, 6, -6.0, dwell_s=0.3, settle_s=0.05)
    x = Generator(sweep, RATE).render(int(1.9 * RATE))[:, 0]
    left, right = through_network(x)
    r = measure_quadrature(signal_of(left, right))
    f = np.array([p.frequency_hz for p in r.points])
    assert f == pytest.approx(np.array(sweep.frequencies_hz), abs=0.2)
    truth = allpass_deg(f, I_CHAIN) - allpass_deg(f, Q_CHAIN)
    assert [p.phase_difference_deg for p in r.points] == pytest.approx(list(truth), abs=0.02)
    assert all(p.span_s < 0.3 for p in r.points)


def test_dc_offset_is_not_a_tone_and_tone_list_restricts():
    left, right = pair([700.0, 1900.0], 90.0, 0.0)
    left, right = left + 0.05, right - 0.03  # DC offsets (conventions: DC is not a tone)
    r = measure_quadrature(signal_of(left, right))
    assert [round(p.frequency_hz) for p in r.points] == [700, 1900]
    only = measure_quadrature(signal_of(left, right), tones=(1900.0,))
    assert [round(p.frequency_hz) for p in only.points] == [1900]


# ---- flagged results and errors -----------------------------------------------------------


def test_antiphase_is_flagged():
    left, right = pair(1000.0, 180.0, 0.0)
    r = measure_quadrature(signal_of(left, right))
    assert r.points[0].status == "antiphase"
    assert any("antiphase" in w for w in r.warnings)
    assert r.points[0].predicted_suppression_db < 1.0  # 90 degrees off quadrature: no suppression


def test_no_tone_is_an_error():
    noise = np.random.default_rng(0).normal(0, 1e-3, (2, 2 * RATE))
    with pytest.raises(MeasurementError, match="no tone"):
        measure_quadrature(signal_of(*noise))


def test_mono_signal_is_an_error():
    with pytest.raises(MeasurementError, match="stereo"):
        QuadratureMeasurement().measure(Signal(np.ones(4096), float(RATE)), {})


def test_clipped_channel_is_flagged(tmp_path, capsys):
    left, right = pair(1000.0, 90.0, 0.0, level=1.3, quantize=False)
    wav = tmp_path / "clip.wav"
    sf.write(str(wav), np.clip(np.column_stack([left, right / 1.3 * 0.5]), -1, 1), RATE, subtype="PCM_16")
    code, out, err = run(["analyze", "quadrature", wav, "--json"], capsys)
    figures = json.loads(out)
    assert code == 0 and figures["clipped"] is True
    assert any("left (I)" in w and "clipped" in w for w in figures["warnings"])


def test_cli_mono_file_is_a_one_line_error(tmp_path, capsys):
    left, _ = pair(1000.0, 90.0, 0.0)
    wav = write_wav(tmp_path / "mono.wav", left)
    code, out, err = run(["analyze", "quadrature", wav], capsys)
    assert code == 2 and out == ""
    assert err.count("\n") == 1 and "stereo" in err


def test_cli_json_and_text(tmp_path, capsys):
    left, right = pair([2000.0, 500.0], [89.0, 91.0], [0.1, -0.1])
    wav = write_wav(tmp_path / "net.wav", np.column_stack([left, right]), subtype="PCM_16")
    code, out, err = run(["analyze", "quadrature", wav, "--json", "--band", 400, 1000], capsys)
    assert (code, err) == (0, "")
    r = json.loads(out)
    assert [p["frequency_hz"] for p in r["points"]] == pytest.approx([500.0, 2000.0], abs=0.01)  # ascending
    keys = {"frequency_hz", "phase_difference_deg", "phase_error_deg", "amplitude_ratio_db", "time_offset_us",
            "predicted_suppression_db"}
    assert keys <= set(r["points"][0])
    for k in ("worst_predicted_suppression_db", "warnings", "sample_rate_hz", "noise_floor_dbfs",
              "analysis_bandwidth_hz", "clipped", "calibration"):
        assert k in r
    assert r["points"][0]["phase_error_deg"] == pytest.approx(1.0, abs=0.02)
    assert r["band"]["points"] == 1 and r["band"]["worst_frequency_hz"] == pytest.approx(500.0, abs=0.01)
    code, out, err = run(["analyze", "quadrature", wav], capsys)
    assert code == 0 and "°" in out and "µs" in out and "predicted suppression" in out


def test_progress_is_silent_off_a_terminal():
    assert terminal_progress("tone", io.StringIO()) is None


def test_pair_phasors_example_quarter_period():
    # A quarter period of 1 kHz is 250 µs (arithmetic): a sine against a cosine is 90 degrees.
    t = np.arange(RATE) / RATE
    c_l, c_r = pair_phasors(np.cos(2e3 * np.pi * t), np.sin(2e3 * np.pi * t), RATE, 1000.0)
    assert np.degrees(np.angle(c_l) - np.angle(c_r)) == pytest.approx(90.0, abs=1e-9)


class _Tty(io.StringIO):
    def isatty(self):
        return True


def test_progress_on_a_terminal(monkeypatch):
    import rtanalyzer.cli.progress as progress

    monkeypatch.setattr(progress, "QUIET_S", 0.0)
    stream = _Tty()
    report = progress.terminal_progress("quadrature: tone", stream)
    report(1, 3)
    report(3, 3)
    assert "quadrature: tone 1/3" in stream.getvalue() and stream.getvalue().endswith("\r\033[K")


def test_noise_spread_matches_the_reported_uncertainty_and_the_crlb_yardstick():
    # Yardstick (not an oracle): Cramér-Rao bound for a tone's phase in white noise,
    # var = 2 sigma^2 / (A^2 N) per channel (Rife & Boorstyn 1974; Kay vol. 1). A windowed
    # estimate pays the window's ENBW (2.0044 bins for Blackman-Harris, Heinzel et al. 2002).
    rng = np.random.default_rng(11)
    t = np.arange(RATE) / RATE
    amp, sigma = 0.01, 0.01
    errors, reported = [], []
    for _ in range(40):
        left = amp * np.cos(2 * np.pi * 1000.3 * t) + rng.normal(0, sigma, t.size)
        right = amp * np.cos(2 * np.pi * 1000.3 * t - np.pi / 2) + rng.normal(0, sigma, t.size)
        p = measure_quadrature(signal_of(left, right)).points[0]
        errors.append(p.phase_difference_deg - 90.0)
        reported.append(p.phase_uncertainty_deg)
    crlb = np.degrees(np.sqrt(2 * 2 * sigma**2 / (amp**2 * t.size)))  # both channels' errors add
    spread = float(np.std(errors))
    assert spread == pytest.approx(float(np.mean(reported)), rel=0.3)
    assert crlb <= spread * 1.3 and spread <= 1.6 * crlb  # within the window's sqrt(ENBW) of the bound


# ---- figures limited by noise are bounds --------------------------------------------------


def test_image_rejection_of_tiny_errors_follows_the_small_error_form():
    # Small-error form of the image-rejection relation, IRR ≈ 4 / ((ΔA/A)² + θ²) (Razavi, RF
    # Microelectronics, image-reject receivers): the exact relation must meet it for tiny errors
    # instead of rounding to "perfect" (cos ε is 1.0 in float64 below ε ≈ 1e-8).
    for eps in (1e-9, 1e-7, 1e-5):
        assert float(image_rejection_db(1.0, eps)) == pytest.approx(10 * np.log10(4 / eps**2), abs=1e-4)
        delta = eps  # an amplitude ratio 1 + δ alone
        assert float(image_rejection_db(1.0 + delta, 0.0)) == pytest.approx(10 * np.log10(4 / delta**2), abs=1e-3)


def test_noise_criterion_false_alarms_and_coverage_match_the_gaussian_tails():
    # Yardsticks: for zero true error and Gaussian noise of σ on both figures (σ_δ = σ_ε, as the
    # DTFT gives), |error|² / σ² is chi-square with 2 degrees of freedom, so an error vector
    # longer than k·√2·σ (the criterion) occurs with probability exp(-k²) (Rayleigh tail); and
    # each |true| ≤ |measured| + kσ holds with probability erf(k/√2) (normal two-sided), both
    # at once erf(k/√2)² (= 0.9946 at k = 3), so the bound holds at least that often.
    from math import erf, sqrt

    from rtanalyzer.dsp.quadrature import noise_limited_suppression

    rng = np.random.default_rng(5)
    n, sigma_rad = 200_000, 1e-4
    sigma_deg, sigma_db = np.degrees(sigma_rad), 20 / np.log(10) * sigma_rad
    noise = rng.normal(0.0, 1.0, (2, n))
    _, bound = noise_limited_suppression(noise[0] * sigma_db, noise[1] * sigma_deg, sigma_db, sigma_deg, sigmas=2.0)
    assert 1.0 - bound.mean() == pytest.approx(np.exp(-4.0), rel=0.1)
    # true errors of 1σ in amplitude and 2σ in phase, measured with that noise
    true_db, true_deg = 1.0 * sigma_db, 2.0 * sigma_deg
    value, bound = noise_limited_suppression(true_db + noise[0] * sigma_db, true_deg + noise[1] * sigma_deg,
                                             sigma_db, sigma_deg)
    truth = float(image_rejection_db(10 ** (true_db / 20), np.radians(true_deg)))
    assert bound.mean() > 0.5  # mostly within the noise at k = 3
    assert np.mean(value[bound] <= truth + 1e-9) >= erf(3 / sqrt(2)) ** 2 - 0.002


def _noisy_pair(freqs, diff_deg, ratio_db, sigma, seconds=2.0, level=0.3, seed=1):
    """Float captures with white Gaussian noise of known σ on each channel (no quantisation)."""
    left, right = pair(freqs, diff_deg, ratio_db, seconds, level, seed, quantize=False)
    noise = np.random.default_rng(seed + 100).normal(0.0, sigma, (2, left.size))
    return left + noise[0], right + noise[1]


def test_an_error_free_capture_reports_a_bound_not_a_number(tmp_path, capsys):
    # Perfect quadrature in white noise: the true suppression is unbounded, so every figure must be
    # a lower bound, below what the Cramér-Rao phase spread allows (Rife & Boorstyn 1974:
    # var = 2σ²/(A²N) per channel, both channels add; a windowed estimate does no better).
    amp, sigma = 0.3, 1e-4
    left, right = _noisy_pair([500.0, 1000.0, 2000.0], 90.0, 0.0, sigma, level=amp)
    r = measure_quadrature(signal_of(left, right)).to_json()
    crlb_rad = np.sqrt(2 * 2 * sigma**2 / (amp**2 * left.size))
    ceiling = 10 * np.log10(4 / (2 * crlb_rad**2))  # errors of 1σ in phase and amplitude
    for p in r["points"]:
        assert p["predicted_suppression_is_bound"] is True
        assert 60.0 < p["predicted_suppression_db"] < ceiling
    assert r["worst_is_lower_bound"] is True and r["band"]["worst_is_lower_bound"] is True
    assert r["worst_predicted_suppression_db"] == min(p["predicted_suppression_db"] for p in r["points"])
    wav = tmp_path / "q.wav"
    sf.write(str(wav), np.column_stack([left, right]), RATE, subtype="FLOAT")
    code, out, err = run(["analyze", "quadrature", wav], capsys)
    assert code == 0 and err == ""
    assert out.count("(limited by noise)") == 4  # the three points and the worst (all in the band)
    assert "worst predicted suppression \u2265 " in out and "150.0" not in out and "200.0" not in out


def test_an_error_above_the_noise_stays_a_figure():
    # 0.5 degree and 0.05 dB measured in the same noise give the image-rejection relation's
    # figure (Razavi, RF Microelectronics), written out here independently.
    left, right = _noisy_pair([1000.0], 90.5, 0.05, 1e-4)
    p = measure_quadrature(signal_of(left, right)).to_json()["points"][0]
    g, c = 10 ** (0.05 / 20), np.cos(np.radians(0.5))
    expected = 10 * np.log10((1 + 2 * g * c + g * g) / (1 - 2 * g * c + g * g))
    assert p["predicted_suppression_is_bound"] is False
    assert p["predicted_suppression_db"] == pytest.approx(expected, abs=0.02)


def test_the_worst_point_is_a_bound_only_when_its_own_figure_is():
    # A measured figure below a bound is the worst, and exact; a bound below every measured
    # figure makes the worst a bound (the true worst lies between it and the lowest figure).
    from rtanalyzer.measurements.quadrature import QuadraturePoint, QuadratureResult

    def point(f, diff, ratio, sd):
        return QuadraturePoint(f, -10.0, -10.0 + ratio, diff, sd, 20 / np.log(10) * np.radians(sd), 2.0)

    clean = point(400.0, 90.00001, 0.0, 0.01)  # within the noise: at least ~60 dB
    off = point(800.0, 91.0, 0.0, 0.001)  # 1 degree: 41.2 dB (check value above)
    r = QuadratureResult(48000.0, (clean, off), -120.0, 1.0, (300.0, 3000.0), False, "stereo").to_json()
    assert r["worst_frequency_hz"] == 800.0 and r["worst_is_lower_bound"] is False
    assert r["worst_predicted_suppression_db"] == pytest.approx(41.2, abs=0.05)
    r = QuadratureResult(48000.0, (clean, point(800.0, 90.0, 0.0, 0.0001)), -120.0, 1.0, (300.0, 3000.0), False,
                         "stereo").to_json()
    assert r["worst_frequency_hz"] == 400.0 and r["worst_is_lower_bound"] is True
    assert r["band"]["worst_is_lower_bound"] is True
