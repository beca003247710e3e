"""Live-engine benchmarks on the simulated bench (prints figures from one run; not a test).

1. per-readout DSP cost (window, FFT, running average) against a bare numpy rfft of the same
   window (target <= 2x), and the measurement plugin's own cost beside it;
2. the running average against recomputing scipy.signal.welch over the same span each readout
   (target >= 5x faster);
3. CPU share of one core while running live at 48 kHz stereo I/Q and at 192 kHz, 20 readouts/s
   (target <= 15 % at 48 kHz);
4. capture-to-readout latency after a step change of the bench's phase trim (target <= 150 ms);
5. resident memory growth over a long run (target < 5 MB over 10 minutes).

Usage: python scripts/bench_live.py [--minutes M] [--skip-memory]
"""

from __future__ import annotations

import argparse
import resource
import time

import numpy as np
import scipy.signal

from rtanalyzer.dsp.running import RunningSpectrum
from rtanalyzer.generator.signals import Tone
from rtanalyzer.live.engine import LiveEngine, live_nfft
from rtanalyzer.measurements.sideband import SidebandMeasurement
from rtanalyzer.sources.bench.knobs import BenchKnobs
from rtanalyzer.sources.bench_source import BenchSource
from rtanalyzer.sources.capture import Signal


def best_time(fn, repeat: int = 200) -> float:
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return float(np.median(times))


def part_dsp_cost() -> None:
    print("1-2. per-readout cost at 48 kHz (median of 200)")
    rate = 48_000
    for averages in (1, 8):
        nfft = live_nfft(rate)
        hop = rate // 20
        x = np.random.default_rng(0).normal(size=nfft * 4)
        window = x[:nfft]
        running = RunningSpectrum(nfft, rate, False, averages)
        for _ in range(averages):
            running.push(window, hop)
        ours = best_time(lambda: running.push(window, hop))
        bare = best_time(lambda: np.fft.rfft(window))
        span = x[: nfft + (averages - 1) * hop]
        welch = best_time(lambda: scipy.signal.welch(span, rate, "blackmanharris", nperseg=nfft,
                                                     noverlap=nfft - hop, scaling="spectrum"))
        t = np.arange(nfft) / rate
        sig = Signal(0.3 * np.cos(2 * np.pi * 5000 * t) + 1e-3 * np.cos(2 * np.pi * 3000 * t)
                     + 1e-6 * np.random.default_rng(1).normal(size=nfft), rate)
        spectrum = RunningSpectrum(nfft, rate, False, 1).push(sig.samples)
        plugin = SidebandMeasurement()
        settings = {"tone": [1000.0], "carrier": 4000.0}
        measure = best_time(lambda: plugin.measure(sig, settings, spectrum=spectrum))
        print(f"   window {nfft}, {averages} average(s): DSP {ours * 1e6:.0f} us = {ours / bare:.2f}x a bare rfft "
              f"({bare * 1e6:.0f} us; target <= 2x) {'OK' if ours / bare <= 2 else 'MISSED'}; "
              f"welch over the same span {welch * 1e6:.0f} us = {welch / ours:.1f}x ours "
              f"(target >= 5x) {'OK' if welch / ours >= 5 else 'MISSED'}; plugin {measure * 1e6:.0f} us")


def run_live(rate: int, iq: bool, seconds: float) -> tuple[float, LiveEngine]:
    knobs = BenchKnobs().with_changes(iq=iq, carrier_offset_hz=4000.0)
    source = BenchSource(knobs, Tone(1000.0, -6.0), rate)
    engine = LiveEngine(source, SidebandMeasurement(), {"tone": [1000.0], "carrier": 4000.0}, iq=iq)
    engine.start()
    time.sleep(1.0)  # warm-up
    cpu0, wall0 = time.process_time(), time.monotonic()
    time.sleep(seconds)
    share = (time.process_time() - cpu0) / (time.monotonic() - wall0)
    engine.stop()
    return share, engine


def part_cpu(seconds: float) -> None:
    print(f"3. CPU share of one core, live on the simulated bench, 20 readouts/s ({seconds:g} s each)")
    for rate, iq, label in ((48_000, True, "48 kHz stereo I/Q"), (48_000, False, "48 kHz mono"),
                            (192_000, True, "192 kHz stereo I/Q")):
        share, engine = run_live(rate, iq, seconds)
        target = " (target <= 15 %)" if rate == 48_000 and iq else ""
        verdict = (" OK" if share <= 0.15 else " MISSED") if target else ""
        print(f"   {label}: {share * 100:.1f} %{target}{verdict} (includes rendering the bench itself); "
              f"xruns {engine.source.counters.as_dict()}")


def part_latency(trials: int = 12) -> None:
    print(f"4. capture-to-readout latency after a phase-trim step ({trials} steps)")
    rate = 48_000
    knobs = BenchKnobs()
    source = BenchSource(knobs, Tone(1000.0, -6.0), rate)
    engine = LiveEngine(source, SidebandMeasurement(), {"tone": [1000.0], "carrier": 4000.0})
    engine.start()
    latencies = []
    trims = (1.2, 0.3)
    try:
        time.sleep(1.0)
        for i in range(trials):
            old = source.knobs
            new = old.with_changes(phase_trim_deg=trims[(i + 1) % 2])
            # Settle, then read the steady value before the step.
            time.sleep(0.6)
            while not engine.readouts.empty():
                engine.readouts.get_nowait()
            before = engine.readouts.get(timeout=1).result["worst_sideband_suppression_db"]
            source.set_knobs(new)
            t_step = time.monotonic()
            time.sleep(0.6)
            after_values = []
            readouts = []
            while not engine.readouts.empty():
                readouts.append(engine.readouts.get_nowait())
            after_values = [r.result["worst_sideband_suppression_db"] for r in readouts if r.result]
            target = after_values[-1]
            for r in readouts:
                if r.t >= t_step and r.result and abs(r.result["worst_sideband_suppression_db"] - target) <= 0.1 * abs(target - before):
                    latencies.append(r.t - t_step)
                    break
    finally:
        engine.stop()
    lat = np.array(latencies) * 1000
    print(f"   first readout within 10 % of the new figure: median {np.median(lat):.0f} ms, worst {lat.max():.0f} ms "
          f"(target <= 150 ms) {'OK' if lat.max() <= 150 else 'MISSED'}; window {engine.nfft} samples "
          f"({engine.nfft / rate * 1000:.0f} ms), readout every {1000 / engine.update_hz:.0f} ms")


def rss_mb() -> float:
    with open("/proc/self/status") as f:
        for line in f:
            if line.startswith("VmRSS:"):
                return int(line.split()[1]) / 1024.0
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def part_memory(minutes: float) -> None:
    print(f"5. resident memory over {minutes:g} minutes live (48 kHz stereo I/Q, 20 readouts/s)")
    knobs = BenchKnobs().with_changes(iq=True)
    source = BenchSource(knobs, Tone(1000.0, -6.0), 48_000)
    engine = LiveEngine(source, SidebandMeasurement(), {"tone": [1000.0], "carrier": 4000.0}, iq=True)
    engine.start()
    try:
        time.sleep(20.0)  # warm-up: ring, caches and queue reach their size
        start = rss_mb()
        samples = [start]
        end_at = time.monotonic() + minutes * 60
        while time.monotonic() < end_at:
            time.sleep(30.0)
            samples.append(rss_mb())
        growth = samples[-1] - start
        print(f"   RSS {start:.1f} MB after warm-up, {samples[-1]:.1f} MB at the end, peak {max(samples):.1f} MB: "
              f"growth {growth:+.2f} MB (target < 5 MB) {'OK' if growth < 5 else 'MISSED'}")
    finally:
        engine.stop()


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--minutes", type=float, default=10.0, help="length of the memory run")
    parser.add_argument("--cpu-seconds", type=float, default=10.0)
    parser.add_argument("--skip-memory", action="store_true")
    args = parser.parse_args()
    part_dsp_cost()
    part_cpu(args.cpu_seconds)
    part_latency()
    if not args.skip_memory:
        part_memory(args.minutes)


if __name__ == "__main__":
    main()
