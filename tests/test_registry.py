"""Measurement plugins through the entry-point group ``rtanalyzer.measurements``.

An extra plugin is installed at runtime the way any distribution is: a module plus a
``*.dist-info`` folder with METADATA and entry_points.txt on sys.path, which
importlib.metadata discovers (Python packaging: the installed-distribution format of
PEP 376 / the "Recording installed projects" specification, entry points per the
"Entry points specification" of the Python Packaging User Guide).
"""

from __future__ import annotations

import json
import sys
import textwrap

import numpy as np
import pytest

from conftest import write_wav
from rtanalyzer.errors import MeasurementError
from rtanalyzer.measurements import registry
from rtanalyzer.measurements.sideband import SidebandMeasurement
from rtanalyzer.measurements.twotone import TwoToneMeasurement

PLUGIN_SOURCE = '''
"""A tiny third-party measurement: the RMS of the signal."""
import numpy as np


class RmsResult:
    warnings = ()

    def __init__(self, rms):
        self.rms = rms

    def to_json(self):
        return {"measurement": "rmsprobe", "rms": self.rms, "warnings": []}


class RmsProbe:
    name = "rmsprobe"
    summary = "root-mean-square level of the signal"
    parameters = ()

    def measure(self, signal, settings):
        return RmsResult(float(np.sqrt(np.mean(np.abs(signal.samples) ** 2))))
'''

BROKEN_SOURCE = 'raise ImportError("this plugin is broken on purpose")\n'


@pytest.fixture
def extra_plugin(tmp_path, monkeypatch):
    """Install 'rmsprobe' (and a broken 'brokenprobe') as a distribution found on sys.path."""
    (tmp_path / "rms_probe.py").write_text(PLUGIN_SOURCE, encoding="utf-8")
    (tmp_path / "broken_probe.py").write_text(BROKEN_SOURCE, encoding="utf-8")
    info = tmp_path / "rmsprobe-0.1.dist-info"
    info.mkdir()
    (info / "METADATA").write_text("Metadata-Version: 2.1\nName: rmsprobe\nVersion: 0.1\n", encoding="utf-8")
    (info / "entry_points.txt").write_text(
        textwrap.dedent(
            """\
            [rtanalyzer.measurements]
            rmsprobe = rms_probe:RmsProbe
            brokenprobe = broken_probe:Nothing
            """
        ),
        encoding="utf-8",
    )
    monkeypatch.syspath_prepend(str(tmp_path))
    yield tmp_path
    for name in ("rms_probe", "broken_probe"):
        sys.modules.pop(name, None)


def test_builtins_are_registered():
    found = registry.available()
    assert isinstance(found["sideband"], SidebandMeasurement)
    assert isinstance(found["twotone"], TwoToneMeasurement)
    assert registry.get("twotone").name == "twotone"


def test_unknown_name_lists_what_there_is():
    with pytest.raises(MeasurementError) as info:
        registry.get("nosuchthing")
    message = str(info.value)
    assert "nosuchthing" in message and "sideband" in message and "twotone" in message
    assert "\n" not in message


def test_extra_plugin_is_found_and_a_broken_one_skipped(extra_plugin):
    found = registry.available()
    assert "rmsprobe" in found
    assert found["rmsprobe"].summary == "root-mean-square level of the signal"
    assert "brokenprobe" not in found
    assert {"sideband", "twotone"} <= found.keys()


def test_extra_plugin_is_listed_by_the_cli(extra_plugin, cautions_already_shown, capsys):
    pytest.importorskip("rtanalyzer.cli.measurements")
    from rtanalyzer.cli.main import main

    assert main(["measurements"]) == 0
    out = capsys.readouterr().out
    names = [line.split()[0] for line in out.splitlines() if line.strip()]
    assert "rmsprobe" in names and "sideband" in names and "twotone" in names
    assert "root-mean-square level of the signal" in out


def test_extra_plugin_runs_through_analyze(extra_plugin, cautions_already_shown, tmp_path, capsys):
    from rtanalyzer.cli.main import main

    t = np.arange(48000) / 48000
    wav = write_wav(tmp_path / "tone.wav", 0.5 * np.sin(2 * np.pi * 1000 * t))
    assert main(["analyze", "rmsprobe", str(wav), "--json"]) == 0
    captured = capsys.readouterr()
    figures = json.loads(captured.out)
    # Arithmetic: a sine of peak A has RMS A/sqrt(2); float WAV keeps the samples exactly
    # enough (32-bit float, ~1e-7 relative).
    assert figures["measurement"] == "rmsprobe"
    assert figures["rms"] == pytest.approx(0.5 / np.sqrt(2.0), rel=1e-5)
    assert captured.err == ""
