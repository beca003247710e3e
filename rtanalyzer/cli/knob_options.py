"""Command-line options for the simulated bench's knobs, shared by `simulate`, `demo` and `live`."""

from __future__ import annotations

import argparse

# option -> knob field, for the knobs whose option name is not simply the field with dashes
RENAMED = {"lo_error_deg": "lo_quadrature_error_deg", "wanted": "wanted_side"}
FLOAT_KNOBS = (
    ("--amplitude-trim-db", "Q path gain relative to I, dB"),
    ("--phase-trim-deg", "constant phase added to the Q path, degrees"),
    ("--lo-error-deg", "carrier drives' departure from quadrature, degrees"),
    ("--carrier-leak-dbc", "carrier leak relative to the strongest wanted sideband, dB"),
    ("--drive-db", "amplifier input PEP relative to saturation, dB"),
    ("--rapp-smoothness", "Rapp smoothness p of the amplifier"),
    ("--am-pm-deg", "AM/PM phase at saturation, degrees"),
    ("--cubic-a3", "a3 of y = x + a3·x³ (with --amplifier cubic)"),
    ("--carrier-offset-hz", "audio frequency of the suppressed carrier, Hz"),
    ("--tuning-error-hz", "receiver mistuning, Hz"),
    ("--rx-low-hz", "receiver passband low edge, Hz"),
    ("--rx-high-hz", "receiver passband high edge, Hz"),
    ("--noise-dbfs", "sound card noise over 0..fs/2, dB re a full-scale sine"),
    ("--capture-pep-dbfs", "PEP of the ideal exciter in the capture, dBFS"),
)
ADC_CHOICES = ("pcm16", "pcm24", "float32")


def add_knob_options(parser: argparse.ArgumentParser) -> None:
    """Add one option per bench knob; a knob left out keeps the demo rig's value.

    ``--wanted`` and ``--iq`` are left to the command: they also shape its frequency plan.
    """
    knobs = parser.add_argument_group("bench knobs (default: the demo rig)")
    for option, text in FLOAT_KNOBS:
        knobs.add_argument(option, type=float, default=None, help=text)
    knobs.add_argument("--network", choices=("example", "ideal"), default=None, help="audio 90° network")
    knobs.add_argument("--amplifier", choices=("rapp", "cubic", "linear"), default=None,
                       help="amplifier model")
    knobs.add_argument("--rx-order", type=int, default=None, help="Butterworth order of each passband edge")
    knobs.add_argument("--adc", choices=ADC_CHOICES, default=None, help="sound card sample format")


def knob_changes(args: argparse.Namespace) -> dict:
    """The knobs given on the command line, by BenchKnobs field name."""
    names = [option[2:].replace("-", "_") for option, _ in FLOAT_KNOBS]
    names += ["network", "amplifier", "rx_order", "adc", "wanted", "iq"]
    changes = {RENAMED.get(n, n): getattr(args, n, None) for n in names}
    if changes.get("wanted_side") not in ("above", "below"):
        changes.pop("wanted_side", None)  # "auto" is a plan setting, not a knob
    return {k: v for k, v in changes.items() if v is not None}
