"""Accuracy of the phase-network analysis and of the channel calibration on fresh random cases.

Prints figures for a person to read; not a test. Parts:

1. single tones at random frequencies (200-3500 Hz), random phase difference (+/-(80..100) degrees)
   and amplitude ratio (+/-1 dB), 16-bit, 2 s at 48 kHz: phase and ratio errors against the
   targets +/-0.02 degrees and +/-0.01 dB (the targets are stated at 1 kHz);
2. a Schroeder multitone through a random RC all-pass network pair (first-order phase
   -2*atan(wRC) per section), 16-bit: worst error over the tones;
3. a stepped sweep through the same kind of network;
4. channel calibration: a random right-input mismatch (gain, phase, delay) measured from one
   capture and removed from another; residual errors against 0.02 degrees and 0.01 dB;
5. noise: a weak tone in white noise, the spread of the phase difference against the reported
   uncertainty and against the Cramér-Rao bound (Rife & Boorstyn 1974) as a yardstick;
6. speed: seconds of capture analysed per second;
7. passband calibration: a profile made from a stepped sweep through a random Butterworth
   receiver, then a sideband pair (wanted above, unwanted below a 4 kHz carrier) through the same
   receiver: the suppression error with and without the correction.

Usage: python scripts/accuracy_quadrature.py [--cases N] [--seed S]
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from rtanalyzer.generator import Generator, Multitone, Sweep
from rtanalyzer.measurements.calibration import CalibrationSet, Profile, make_channels_profile
from rtanalyzer.measurements.quadrature import measure_quadrature
from rtanalyzer.sources.capture import Signal

RATE = 48_000
PHASE_TARGET_DEG = 0.02
RATIO_TARGET_DB = 0.01


def q16(x):
    return np.round(np.clip(x, -1, 1 - 2**-15) * 2**15) / 2**15


def allpass_deg(f, chain):
    return sum(np.degrees(-2 * np.arctan(2 * np.pi * f * r * c)) for r, c in chain)


def random_network(rng):
    """Four sections per chain, corners spread over the band, a random E-series-like rounding."""
    corners_i = np.geomspace(150, 12000, 4) * rng.uniform(0.8, 1.25, 4)
    corners_q = np.geomspace(60, 4000, 4) * rng.uniform(0.8, 1.25, 4)
    c = 10e-9
    return tuple((1 / (2 * np.pi * f * c), c) for f in corners_i), tuple((1 / (2 * np.pi * f * c), c) for f in corners_q)


def apply(x, response):
    f = np.fft.rfftfreq(x.size, 1 / RATE)
    return np.fft.irfft(np.fft.rfft(x) * response(f), x.size)


def report(name, errors, target, unit):
    e = np.abs(np.asarray(errors))
    verdict = "meets" if e.max() <= target else "MISSES"
    print(f"   {name}: max {e.max():.5f} {unit}, rms {np.sqrt(np.mean(e**2)):.5f} {unit}  ({verdict} ±{target} {unit})")


def part_single(rng, cases):
    print("1. single tones, 16-bit, 2 s")
    ph, ra = [], []
    for _ in range(cases):
        f = rng.uniform(200, 3500)
        diff = rng.uniform(80, 100) * rng.choice([-1, 1])
        ratio = rng.uniform(-1, 1)
        level = rng.uniform(0.05, 0.9)
        t = np.arange(2 * RATE) / RATE
        p0 = rng.uniform(0, 2 * np.pi)
        left = q16(level * np.cos(2 * np.pi * f * t + p0))
        right = q16(level * 10 ** (ratio / 20) * np.cos(2 * np.pi * f * t + p0 - np.radians(diff)))
        p = measure_quadrature(Signal(left + 1j * right, RATE)).points[0]
        ph.append(p.phase_difference_deg - diff)
        ra.append(p.amplitude_ratio_db - ratio)
    report("phase difference", ph, PHASE_TARGET_DEG, "deg")
    report("amplitude ratio ", ra, RATIO_TARGET_DB, "dB")


def part_network(rng, cases, kind):
    print(f"{'2' if kind == 'multitone' else '3'}. {kind} through a random RC all-pass pair, 16-bit")
    ph, ra = [], []
    for _ in range(cases):
        chain_i, chain_q = random_network(rng)
        gain = 10 ** (rng.uniform(-0.5, 0.5) / 20)
        if kind == "multitone":
            sig = Multitone.spread(200.0, 3500.0, int(rng.integers(8, 32)), -3.0)
            seconds = 2.0
        else:
            sig = Sweep.log_range(300.0, 3000.0, 10, -6.0, dwell_s=0.25, settle_s=0.05)
            seconds = 2.6
        x = Generator(sig, RATE).render(int(seconds * RATE))[:, 0]
        left = q16(apply(x, lambda f: np.exp(1j * np.radians(allpass_deg(f, chain_i)))))
        right = q16(apply(x, lambda f: gain * np.exp(1j * np.radians(allpass_deg(f, chain_q)))))
        r = measure_quadrature(Signal(left + 1j * right, RATE), band_hz=(200, 3500))
        for p in r.points:
            truth = allpass_deg(p.frequency_hz, chain_i) - allpass_deg(p.frequency_hz, chain_q)
            ph.append(p.phase_difference_deg - truth)
            ra.append(p.amplitude_ratio_db - 20 * np.log10(gain))
    print(f"   {len(ph)} points")
    report("phase difference", ph, PHASE_TARGET_DEG, "deg")
    report("amplitude ratio ", ra, RATIO_TARGET_DB, "dB")


def part_calibration(rng, cases):
    print("4. channel calibration (multitone into both inputs, then a network capture), 16-bit")
    tones = Multitone.spread(250.0, 3500.0, 12, -6.0)
    ph, ra = [], []
    for _ in range(cases):
        g, phi, tau = rng.uniform(-0.5, 0.5), rng.uniform(-1, 1), rng.uniform(-5e-6, 5e-6)

        def card(f):
            return 10 ** (g / 20) * np.exp(1j * (np.radians(phi) - 2 * np.pi * f * tau))

        x = Generator(tones, RATE).render(2 * RATE)[:, 0]
        prof = make_channels_profile(Signal(q16(x) + 1j * q16(apply(x, card)), RATE), "card")
        diff, ratio = rng.uniform(85, 95), rng.uniform(-0.3, 0.3)
        y = Generator(tones, RATE).render(2 * RATE)[:, 0]
        right = apply(y, lambda f: 10 ** (ratio / 20) * np.exp(-1j * np.radians(diff)) * card(f))
        sig = Signal(q16(y) + 1j * q16(right), RATE)
        fixed = CalibrationSet((Profile("channels", "card", RATE, values=prof.values),)).prepare(sig)
        for p in measure_quadrature(fixed).points:
            ph.append(p.phase_difference_deg - diff)
            ra.append(p.amplitude_ratio_db - ratio)
    report("phase difference after correction", ph, PHASE_TARGET_DEG, "deg")
    report("amplitude ratio after correction ", ra, RATIO_TARGET_DB, "dB")


def part_noise(rng, cases):
    print("5. noise: 1 s, tone 0.01 peak, white noise 0.01 rms per channel")
    t = np.arange(RATE) / RATE
    errors, reported = [], []
    for _ in range(cases):
        f = rng.uniform(300, 3000)
        left = 0.01 * np.cos(2 * np.pi * f * t) + rng.normal(0, 0.01, t.size)
        right = 0.01 * np.cos(2 * np.pi * f * t - np.pi / 2) + rng.normal(0, 0.01, t.size)
        p = measure_quadrature(Signal(left + 1j * right, RATE), tones=(f,)).points[0]
        errors.append(p.phase_difference_deg - 90.0)
        reported.append(p.phase_uncertainty_deg)
    crlb = np.degrees(np.sqrt(4 * 0.01**2 / (0.01**2 * t.size)))
    print(f"   spread {np.std(errors):.3f} deg, reported {np.mean(reported):.3f} deg, Cramér-Rao bound {crlb:.3f} deg "
          f"(ratio {np.std(errors) / crlb:.2f}; the Blackman-Harris window's sqrt(ENBW) is 1.42)")


def part_speed():
    print("6. speed")
    x = Generator(Multitone.spread(200.0, 3500.0, 32, -3.0), RATE).render(30 * RATE)[:, 0]
    sig = Signal(x + 1j * np.roll(x, 3), RATE)
    start = time.perf_counter()
    r = measure_quadrature(sig)
    took = time.perf_counter() - start
    print(f"   30 s stereo capture, {len(r.points)} tones: {took:.2f} s ({30 / took:.0f}x real time)")


def part_passband(rng, cases):
    from scipy import signal as sps

    from rtanalyzer.measurements.calibration import make_passband_profile
    from rtanalyzer.measurements.sideband import SidebandMeasurement

    print("7. passband calibration (profile from a 40-step sweep 300-8000 Hz; a sideband pair through the "
          "same receiver), 16-bit")
    sweep = Sweep.log_range(300.0, 8000.0, 40, -6.0, dwell_s=0.25, settle_s=0.08)
    reference = Generator(sweep, RATE).render(int(40 * 0.25 * RATE))[:, 0]
    raw_err, fixed_err = [], []
    t = np.arange(2 * RATE) / RATE
    for _ in range(cases):
        order = int(rng.integers(2, 7))
        edges = (rng.uniform(150.0, 600.0), rng.uniform(5000.0, 9000.0))
        sos = sps.butter(order, edges, "bandpass", fs=RATE, output="sos")
        profile = make_passband_profile(Signal(q16(sps.sosfilt(sos, reference)), RATE), "rx")
        cal = CalibrationSet((profile,))
        tone, truth = rng.uniform(300.0, 3000.0), rng.uniform(25.0, 55.0)
        x = 0.3 * np.cos(2 * np.pi * (4000 + tone) * t) + 0.3 * 10 ** (-truth / 20) * np.cos(2 * np.pi * (4000 - tone) * t + 1.0)
        y = q16(sps.sosfilt(sos, x))[RATE // 2:]
        sig = Signal(y, RATE)
        result = SidebandMeasurement().measure(sig, {"tone": [tone], "carrier": 4000.0, "wanted": "above"}).to_json()
        raw_err.append(result["points"][0]["sideband_suppression_db"] - truth)
        fixed_err.append(cal.finish(result, sig)["points"][0]["sideband_suppression_db"] - truth)
    e_raw, e_fix = np.abs(raw_err), np.abs(fixed_err)
    print(f"   uncorrected: max {e_raw.max():.3f} dB (the receiver's tilt); corrected: max {e_fix.max():.4f} dB, "
          f"rms {np.sqrt(np.mean(e_fix**2)):.4f} dB over {cases} receivers")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cases", type=int, default=20)
    ap.add_argument("--seed", type=int, default=None, help="default: fresh cases each run")
    args = ap.parse_args()
    rng = np.random.default_rng(args.seed)
    part_single(rng, args.cases)
    part_network(rng, max(2, args.cases // 4), "multitone")
    part_network(rng, max(2, args.cases // 4), "sweep")
    part_calibration(rng, max(2, args.cases // 4))
    part_noise(rng, 3 * args.cases)
    part_speed()
    part_passband(rng, max(2, args.cases // 4))


if __name__ == "__main__":
    main()
