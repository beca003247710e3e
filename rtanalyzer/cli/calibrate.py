"""``rtanalyzer calibrate channels|passband|level CAPTURE --name NAME``: make a calibration profile.

The profile is written as NAME.cal in ``$RTANALYZER_CALIBRATION_DIR`` or ./calibration (or
``--dir``), and applied later with ``--calibration NAME``.
"""

from __future__ import annotations

import argparse

from rtanalyzer.cli.output import print_json
from rtanalyzer.errors import RtaError


def add_parser(subparsers) -> argparse.ArgumentParser:
    """Register ``calibrate`` on the ``rtanalyzer`` sub-command parser."""
    p = subparsers.add_parser(
        "calibrate",
        help="make a calibration profile (channel mismatch, receiver passband, level in volts)",
        description="Measure the measuring chain and write a calibration profile (format in calibration/README.md).",
    )
    p.add_argument("kind", choices=("channels", "passband", "level"),
                   help="channels: same signal into both inputs; passband: flat multitone through the receiver; "
                   "level: a sine of known voltage")
    p.add_argument("file", metavar="CAPTURE", help="the calibration capture (WAV or FLAC)")
    p.add_argument("--name", required=True, help="profile name (letters, digits, '.', '_', '-')")
    p.add_argument("--device", default="unknown", help="sound card and input used (recorded in the profile)")
    p.add_argument("--dir", default=None, help="folder to write NAME.cal in (default $RTANALYZER_CALIBRATION_DIR "
                   "or ./calibration)")
    p.add_argument("--force", action="store_true", help="replace an existing profile of that name")
    p.add_argument("--tones", type=float, nargs="+", metavar="HZ", help="passband: audio frequencies of the tones "
                   "in the capture (default: every tone found)")
    p.add_argument("--channel", type=int, metavar="N", help="passband: channel to read (default 1); level: only "
                   "this channel (default every channel)")
    p.add_argument("--volts-rms", type=float, metavar="V", help="level: RMS voltage of the reference sine")
    p.add_argument("--json", action="store_true", help="print the profile as one JSON object")
    p.set_defaults(func=run)
    return p


def run(args: argparse.Namespace) -> int:
    from rtanalyzer.cli.progress import terminal_progress
    from rtanalyzer.measurements import calibration as cal
    from rtanalyzer.measurements.quadrature import stereo_view
    from rtanalyzer.sources.wavfile import read_capture

    cal.check_name(args.name)
    if args.kind == "level" and args.volts_rms is None:
        raise RtaError("calibrate level needs --volts-rms V, the RMS voltage of the reference sine")
    capture = read_capture(args.file)
    if args.kind == "channels":
        profile = cal.make_channels_profile(stereo_view(capture, "calibrate channels"), args.name, args.device,
                                            args.file, progress=terminal_progress("channels: tone"))
    elif args.kind == "passband":
        profile = cal.make_passband_profile(capture.view(channel=args.channel), args.name, args.tones or (),
                                            args.device, args.file, progress=terminal_progress("passband: tone"))
    else:
        profile = cal.make_level_profile(capture, args.volts_rms, args.name,
                                         (args.channel,) if args.channel else (), args.device, args.file)
    path = cal.write_profile(profile, args.dir, args.force)
    if args.json:
        print_json({**profile.to_json(), "path": str(path)})
        return 0
    print(f"wrote {path} ({profile.kind}, {profile.rate_hz:g} Hz)")
    v = profile.values
    if profile.kind == "channels":
        print(f"right input against left: {v['gain_db']:+.4f} dB, {v['phase_deg']:+.4f}° at 0 Hz, delay "
              f"{v['delay_s'] * 1e6:+.3f} µs ({int(v['tones'])} tones {v['low_hz']:.0f}-{v['high_hz']:.0f} Hz, "
              f"fit residual {v['residual_deg']:.4f}°)")
    elif profile.kind == "passband":
        print(f"{len(profile.points)} points, {profile.points[0][0]:.0f}-{profile.points[-1][0]:.0f} Hz, gain "
              f"{min(g for _, g in profile.points):+.2f} to {max(g for _, g in profile.points):+.2f} dB about the mean")
    else:
        for key, value in v.items():
            print(f"{key.replace('_', ' ')}: {value:.4g} V (a 0 dBFS sine)")
    print(f"apply with: --calibration {profile.name}")
    return 0
