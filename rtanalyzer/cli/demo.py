"""`rtanalyzer demo`: the simulated bench through the analyzer, figures beside the model's truth.

No hardware needed: it shows what a capture of the demo rig reads, and how close the
analyzer comes to what the model says is there.
"""

from __future__ import annotations

import argparse


def add_parser(subparsers) -> None:
    p = subparsers.add_parser(
        "demo",
        help="run the simulated bench through the analyzer (no hardware needed)",
        description="Simulate the demo rig, analyse the capture, and compare with the model's truth.",
    )
    p.add_argument("--phase-trim-deg", type=float, default=None, help="bench phase trim (default: the rig's)")
    p.add_argument("--amplitude-trim-db", type=float, default=None, help="bench amplitude trim")
    p.add_argument("--seconds", type=float, default=2.0, help="length of each simulated capture")
    p.set_defaults(shows_cautions=True, func=run)


def _line(label: str, measured: float | None, truth: float | None, bound: str = "") -> str:
    """One figure beside the model's truth; ``bound`` prefixes a figure that is only a bound."""
    shown = "—" if measured is None else (f"{bound} {measured:.1f}" if bound else f"{measured:.2f}")
    truth_text = "—" if truth is None else f"{truth:.2f}"
    return f"  {label:<38} {shown:>18} dB   model {truth_text:>8} dB"


def run(args: argparse.Namespace) -> int:
    from rtanalyzer.measurements.sideband import SidebandMeasurement
    from rtanalyzer.measurements.twotone import TwoToneMeasurement
    from rtanalyzer.sources.bench.knobs import BenchKnobs
    from rtanalyzer.sources.bench.model import simulate_capture
    from rtanalyzer.sources.capture import Capture

    knobs = BenchKnobs()
    changes = {k: v for k, v in (("phase_trim_deg", args.phase_trim_deg), ("amplitude_trim_db", args.amplitude_trim_db)) if v is not None}
    knobs = knobs.with_changes(**changes)
    rate = 48_000
    print("simulated bench: the Halyard 20 m phasing exciter (an invented demo rig), its output turned")
    print("back into audio by a bench receiver; no hardware is used")
    print(f"  phase trim {knobs.phase_trim_deg:+.2f}°, amplitude trim {knobs.amplitude_trim_db:+.2f} dB, "
          f"carrier lands near {knobs.carrier_offset_hz:g} Hz, {rate} Hz capture")

    samples, truth = simulate_capture(knobs, [1000.0], args.seconds, rate)
    r = SidebandMeasurement().measure(Capture(samples, rate, "bench").view(), {"tone": [1000.0], "carrier": knobs.carrier_offset_hz})
    j = r.to_json()
    p = j["points"][0]
    print("\nsingle tone 1000 Hz")
    print(_line("opposite-sideband suppression", p["sideband_suppression_db"], truth["points"][0]["sideband_suppression_db"],
                "" if p["unwanted_detected"] else "at least"))
    print(_line("carrier suppression", j["carrier_suppression_db"], truth["carrier_suppression_db"],
                "" if j["carrier_detected"] else "at least"))

    tones = [700.0, 1900.0]
    samples, truth = simulate_capture(knobs, tones, args.seconds, rate)
    r = TwoToneMeasurement().measure(Capture(samples, rate, "bench").view(), {"tones": tones, "carrier": knobs.carrier_offset_hz})
    j = r.to_json()
    print(f"\ntwo-tone 700 + 1900 Hz, PEP {j['pep_dbfs']:.1f} dBFS")
    true_imd = {o["order"]: o for o in truth["twotone"]["imd"]}
    for o in j["imd"]:
        print(_line(f"IMD{o['order']} worst, dB PEP", o["worst_db_pep"], true_imd[o["order"]]["worst_db_pep"],
                    "below" if o["worst_is_bound"] else ""))
    print("\ntrim the bench and run again, e.g.: rtanalyzer demo --phase-trim-deg 0.3 --amplitude-trim-db 0.05")
    print("analyse your own capture:          rtanalyzer analyze sideband FILE --tone 1000 --carrier HZ")
    return 0
