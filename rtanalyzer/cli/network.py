"""``rtanalyzer network FILE``: design check of an RC all-pass network pair from its component values."""

from __future__ import annotations

import argparse

from rtanalyzer.cli.output import emit


def add_parser(subparsers) -> argparse.ArgumentParser:
    """Register ``network`` on the ``rtanalyzer`` sub-command parser."""
    p = subparsers.add_parser(
        "network",
        help="ideal phase difference and tolerance spread of an RC all-pass network from its parts list",
        description="Read a network file (one section per line: 'I R C' or 'Q R C', SI prefixes, '#' comments; "
        "see examples/bench.network), show the ideal phase difference across the band and the suppression it "
        "allows, and the share of builds within component tolerances that reach a target.",
    )
    p.add_argument("file", metavar="FILE", help="network file")
    p.add_argument("--band", type=float, nargs=2, default=(300.0, 3000.0), metavar=("LO", "HI"),
                   help="audio band, Hz (default 300 3000)")
    p.add_argument("--tolerance-r", type=float, default=1.0, metavar="PCT", help="resistor tolerance, %% (default 1)")
    p.add_argument("--tolerance-c", type=float, default=5.0, metavar="PCT",
                   help="capacitor tolerance, %% (default 5)")
    p.add_argument("--builds", type=int, default=2000, metavar="N", help="simulated builds (default 2000)")
    p.add_argument("--target-db", type=float, default=40.0, metavar="DB",
                   help="suppression a build must reach across the band (default 40)")
    p.add_argument("--seed", type=int, default=0, help="seed of the simulated builds (default 0)")
    p.add_argument("--measured", metavar="CAPTURE", help="stereo capture of the built network to compare against")
    p.add_argument("--calibration", action="extend", nargs="+", metavar="NAME", default=None,
                   help="calibration profile(s) for the --measured capture")
    p.add_argument("--json", action="store_true", help="print exactly one JSON object")
    p.set_defaults(func=run)
    return p


def run(args: argparse.Namespace) -> int:
    from rtanalyzer.measurements.network_design import compare_measured, design_report, monte_carlo, read_network

    network = read_network(args.file)
    report = design_report(network, args.band)
    spread = monte_carlo(network, args.band, args.tolerance_r, args.tolerance_c, args.builds, args.target_db,
                         args.seed)
    out = {
        "measurement": "network",
        "file": args.file,
        "sections": {"i": [list(s) for s in network.chain_i], "q": [list(s) for s in network.chain_q]},
        "ideal": report,
        "tolerance": spread,
        "measured": None,
        "calibration": [],
        "warnings": [],
    }
    if args.measured:
        from rtanalyzer.cli.quadrature_capture import quadrature_figures

        figures = quadrature_figures(args.measured, (), args.band, args.calibration or ())
        out["measured"] = {"capture": args.measured, **compare_measured(network, figures["points"])}
        out["calibration"] = figures["calibration"]
        out["warnings"] = figures["warnings"]
    emit(out, args.json, _text)
    return 0


def _text(r: dict) -> list[str]:
    ideal, mc = r["ideal"], r["tolerance"]
    lo, hi = ideal["band_hz"]
    lines = [
        f"network {r['file']}: {len(r['sections']['i'])} sections in I, {len(r['sections']['q'])} in Q",
        f"band {lo:g}-{hi:g} Hz, ideal parts, equal amplitudes:",
        f"  I - Q phase {ideal['min_phase_difference_deg']:.3f} to {ideal['max_phase_difference_deg']:.3f}°; "
        f"worst {ideal['worst_predicted_suppression_db']:.1f} dB at {ideal['worst_frequency_hz']:.0f} Hz",
        f"  after the best constant phase trim ({ideal['trim_deg']:+.3f}°): ripple ±{ideal['ripple_deg']:.3f}°, "
        f"worst {ideal['trimmed_worst_predicted_suppression_db']:.1f} dB at "
        f"{ideal['trimmed_worst_frequency_hz']:.0f} Hz",
        f"{'tone':>10}  {'I - Q phase':>11}  {'error':>9}  suppression",
    ]
    points = ideal["points"]
    for p in points[:: max(1, len(points) // 10)] + ([points[-1]] if (len(points) - 1) % max(1, len(points) // 10) else []):
        lines.append(f"{p['frequency_hz']:>7.0f} Hz  {p['phase_difference_deg']:>10.3f}°  "
                     f"{p['phase_error_deg']:>+8.3f}°  {p['predicted_suppression_db']:.1f} dB")
    pc, tp = mc["worst_suppression_percentiles_db"], mc["trimmed_worst_suppression_percentiles_db"]
    lines += [
        f"tolerances R ±{mc['tolerance_r_percent']:g} %, C ±{mc['tolerance_c_percent']:g} % "
        f"({mc['distribution']}), {mc['builds']} builds:",
        f"  reach {mc['target_db']:g} dB across the band: {100 * mc['share_reaching_target']:.1f} % as built, "
        f"{100 * mc['share_reaching_target_after_trim']:.1f} % after a phase trim",
        f"  worst in band as built: median {pc['50']:.1f} dB (5 % of builds below {pc['5']:.1f} dB); "
        f"after a trim: median {tp['50']:.1f} dB (5 % below {tp['5']:.1f} dB)",
    ]
    m = r["measured"]
    if m:
        lines.append(f"measured {m['capture']} against the design (measured - design):")
        for p in m["points"]:
            lines.append(f"{p['frequency_hz']:>7.1f} Hz  measured {p['measured_phase_difference_deg']:.3f}°  "
                         f"design {p['design_phase_difference_deg']:.3f}°  {p['difference_deg'] + 0.0:+.3f}°  "
                         f"Q/I {p['amplitude_ratio_db']:+.3f} dB")
        if m["mean_difference_deg"] is not None:
            lines.append(f"mean difference {m['mean_difference_deg']:+.3f}° (spread {m['spread_deg']:.3f}° peak to peak): a "
                         "constant difference is trim or wiring; a spread means parts differ from the list")
    if r["calibration"]:
        lines.append("calibration: " + ", ".join(r["calibration"]))
    lines += [f"warning: {w}" for w in r["warnings"]]
    return lines
