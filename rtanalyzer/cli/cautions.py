"""Safety cautions for bench work with an exciter and a sound card, shown once per user and on request."""

from __future__ import annotations

import os
from pathlib import Path
from typing import TextIO

#: Environment variable that moves the per-user configuration folder (tests point it at a tmp dir).
CONFIG_DIR_ENV = "RTANALYZER_CONFIG_DIR"
_MARKER_NAME = "cautions-shown"

CAUTIONS = """\
Safety cautions for bench work with rtanalyzer
- Test a transmitter into a dummy load rated for its full output, never into an antenna on the bench.
- Never connect RF, or a transmitter output, straight to a sound card. Sample it through a
  receiver or mixer, with an attenuator or pad ahead of the card input, and keep the level below
  the card's maximum line input (often about 1-2 V peak; check your card's specification).
- Keep clear of RF exposure: antennas, open feed lines and unshielded stages carry high fields.
- Mains and high voltage inside equipment can kill: unplug, discharge the capacitors, and work
  with one hand where you must work live.
- Transmit only as your operating licence and local rules allow.
This list does not replace local codes and regulations.
"""


def config_dir() -> Path:
    """Per-user configuration folder: ``$RTANALYZER_CONFIG_DIR`` if set, else the platform's own."""
    override = os.environ.get(CONFIG_DIR_ENV)
    if override:
        return Path(override)
    from platformdirs import user_config_dir

    return Path(user_config_dir("rtanalyzer", appauthor=False))


def show_first_run_notice(stream: TextIO) -> bool:
    """Print :data:`CAUTIONS` to ``stream`` the first time this user runs the tool.

    A marker file in :func:`config_dir` records that they were shown. When the folder cannot be
    written (read-only home, odd permissions) nothing fails: the cautions are printed each time.

    Returns
    -------
    bool
        True when the cautions were printed.
    """
    try:
        marker = config_dir() / _MARKER_NAME
        if marker.is_file():
            return False
    except OSError:
        marker = None
    stream.write(CAUTIONS)
    stream.write("(Shown once; see them again with: rtanalyzer cautions)\n")
    try:
        stream.flush()
    except (OSError, ValueError):
        pass
    if marker is not None:
        try:
            marker.parent.mkdir(parents=True, exist_ok=True)
            marker.write_text("The safety cautions were shown to this user.\n", encoding="utf-8")
        except OSError:
            pass
    return True


def _run(args) -> int:
    import sys

    sys.stdout.write(CAUTIONS)
    return 0


def add_parser(subparsers) -> None:
    """Register the ``cautions`` command."""
    parser = subparsers.add_parser(
        "cautions",
        help="print the safety cautions for bench work",
        description="Print the safety cautions for working on exciters and transmitters with a sound card.",
    )
    parser.set_defaults(func=_run)
