"""Entry point of the ``rtanalyzer`` command: one sub-command per module, errors as one line."""

from __future__ import annotations

import argparse
import os
import sys
import traceback

from rtanalyzer import __version__
from rtanalyzer.errors import RtaError

# Each module offers add_parser(subparsers) and sets `func` on its parser; imported lazily so
# that `rtanalyzer --help` stays quick and no command pulls in another's heavy imports.
COMMAND_MODULES = (
    "rtanalyzer.cli.analyze",
    "rtanalyzer.cli.simulate",
    "rtanalyzer.cli.demo",
    "rtanalyzer.cli.live",
    "rtanalyzer.cli.measurements",
    "rtanalyzer.cli.cautions",
    "rtanalyzer.cli.generate",
    "rtanalyzer.cli.devices",
    "rtanalyzer.cli.network",
    "rtanalyzer.cli.diagnose",
    "rtanalyzer.cli.calibrate",
    "rtanalyzer.cli.history",
)


class _Parser(argparse.ArgumentParser):
    """argparse that reports usage errors as one line (no usage dump) and exit code 2."""

    def error(self, message: str) -> None:  # noqa: D401 - argparse hook
        # "rtanalyzer: error:" is printed in front already: name only the sub-command, and where
        # the options are explained.
        command = self.prog.removeprefix("rtanalyzer").strip()
        text = f"{command}: {message}" if command else message
        raise RtaError(f"{text} (see: {self.prog} --help)")


def build_parser() -> argparse.ArgumentParser:
    import importlib

    parser = _Parser(
        prog="rtanalyzer",
        description="Sound-card instrument for aligning SSB exciters (sideband, carrier, two-tone IMD).",
    )
    parser.add_argument("--version", action="version", version=f"rtanalyzer {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    sub.required = True
    for name in COMMAND_MODULES:
        importlib.import_module(name).add_parser(sub)
    return parser


def main(argv: list[str] | None = None) -> int:
    try:
        args = build_parser().parse_args(argv)
        if getattr(args, "shows_cautions", False):
            from rtanalyzer.cli.cautions import show_first_run_notice

            # Once per user, before the first command that drives or listens to a rig;
            # stderr keeps --json/--jsonl output clean.
            show_first_run_notice(sys.stderr)
        return int(args.func(args) or 0)
    except RtaError as exc:
        print(f"rtanalyzer: error: {exc}", file=sys.stderr)
        return exc.exit_code
    except KeyboardInterrupt:
        print("rtanalyzer: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        return 0
    except Exception as exc:  # a bug: still one line, full trace only on request
        if os.environ.get("RTANALYZER_DEBUG"):
            traceback.print_exc()
        print(
            f"rtanalyzer: internal error: {type(exc).__name__}: {exc} "
            "(set RTANALYZER_DEBUG=1 for the trace and please report it)",
            file=sys.stderr,
        )
        return 3


if __name__ == "__main__":
    raise SystemExit(main())
