"""The ``measurements`` command lists what the registry offers (registry replaced by a stand-in)."""

from __future__ import annotations

import argparse
from types import SimpleNamespace

import pytest

registry = pytest.importorskip("rtanalyzer.measurements.registry")

from rtanalyzer.cli import measurements as command  # noqa: E402
from rtanalyzer.errors import MeasurementError  # noqa: E402


def _run(argv=("measurements",)):
    parser = argparse.ArgumentParser()
    command.add_parser(parser.add_subparsers(dest="command"))
    args = parser.parse_args(list(argv))
    return args.func(args)


def test_lists_names_and_summaries(monkeypatch, capsys):
    fake = {
        "twotone": SimpleNamespace(name="twotone", summary="Two-tone IMD products."),
        "sideband": SimpleNamespace(name="sideband", summary="Opposite sideband and carrier."),
    }
    monkeypatch.setattr(registry, "available", lambda: fake)
    assert _run() == 0
    lines = capsys.readouterr().out.splitlines()
    assert lines == [
        "sideband  Opposite sideband and carrier.",
        "twotone   Two-tone IMD products.",
    ]


def test_no_plugins_is_a_one_line_error(monkeypatch):
    monkeypatch.setattr(registry, "available", lambda: {})
    with pytest.raises(MeasurementError, match="no measurement plugins found") as info:
        _run()
    assert "\n" not in str(info.value)
