"""The worst opposite-sideband suppression inside an audio band (`analyze sideband --band LOW HIGH`).

Oracle: synthetic captures with the unwanted side of each tone at a known level below the wanted
side. Opposite-sideband suppression = wanted - unwanted (measurement-conventions.md); the in-band
worst is the smallest of those figures among tones with LOW <= tone <= HIGH (the definition, so
arithmetic on the injected levels); a residue under the noise is a lower bound ("at least").
"""

from __future__ import annotations

import json

import pytest

from conftest import capture_of, sigma_for_bin_level, synth, write_wav
from conftest import run_cli as run
from rtanalyzer.errors import MeasurementError
from rtanalyzer.measurements.sideband import SidebandMeasurement, worst_in_band

RATE = 48000
NOISE = sigma_for_bin_level(-115.0, 32768)  # ~ a good 24-bit card per 1.5 Hz bin (common practice, no source)
CARRIER = 5000.0
# Tone (Hz) -> injected suppression (dB); None puts the unwanted side 10 dB under the noise.
# Overall worst: 30 dB at 200 Hz, outside the default 300-3000 Hz band; in-band worst 38 dB at 2900 Hz.
SUPPRESSION = {200.0: 30.0, 1000.0: None, 2000.0: 45.0, 2900.0: 38.0, 3400.0: 33.0}
WANTED_DBFS = -14.0


@pytest.fixture(autouse=True)
def _quiet(cautions_already_shown):
    """CLI calls run as a user who has already seen the first-run safety notice."""


def capture_samples(seed=5):
    comps = []
    for i, (tone, sup) in enumerate(SUPPRESSION.items()):
        comps.append((CARRIER + tone, WANTED_DBFS, 0.4 * i))
        comps.append((CARRIER - tone, -125.0 if sup is None else WANTED_DBFS - sup, 1.0 + 0.7 * i))
    return synth(comps, RATE, 1.0, NOISE, seed)


def measure(settings):
    r = SidebandMeasurement().measure(capture_of(capture_samples()).view(), settings)
    out = r.to_json()
    json.dumps(out, allow_nan=False)
    return out


def cli_argv(wav, *extra):
    tones = [a for t in SUPPRESSION for a in ("--tone", t)]
    return ["analyze", "sideband", wav, *tones, "--carrier", CARRIER, "--wanted", "above", *extra]


def test_default_band_reports_the_in_band_worst_apart_from_the_overall_worst():
    # No "band" in the settings, as the live engine calls the plugin: the default 300-3000 Hz applies.
    r = measure({"tone": list(SUPPRESSION), "carrier": CARRIER})
    assert r["band_hz"] == [300.0, 3000.0]
    # Overall worst: the 200 Hz tone, 30 dB (injected; tolerance 0.2 dB as test_sideband's).
    assert r["worst_sideband_suppression_db"] == pytest.approx(30.0, abs=0.2)
    assert r["worst_is_lower_bound"] is False
    inb = r["worst_in_band"]
    assert inb["tone_hz"] == 2900.0  # 38 dB is the smallest of 1000 (bound), 2000 and 2900 Hz
    assert inb["sideband_suppression_db"] == pytest.approx(38.0, abs=0.2)
    assert inb["is_lower_bound"] is False
    assert not any("band" in w for w in r["warnings"])


def test_a_band_whose_worst_is_a_bound_says_at_least():
    r = measure({"tone": list(SUPPRESSION), "carrier": CARRIER, "band": [900.0, 1100.0]})
    inb = r["worst_in_band"]
    assert inb["tone_hz"] == 1000.0 and inb["is_lower_bound"] is True
    # Unwanted injected at -125 dBFS: true suppression 111 dB; the bound lies at or below it
    # and well above the detected figures (conventions: "at least X dB", X from the noise floor).
    assert 80.0 <= inb["sideband_suppression_db"] <= 111.0


def test_a_band_with_no_tone_inside_gives_null_and_a_warning_naming_it():
    r = measure({"tone": list(SUPPRESSION), "carrier": CARRIER, "band": [3500.0, 4000.0]})
    assert r["worst_in_band"] is None
    assert any("3500-4000 Hz" in w for w in r["warnings"])
    assert r["worst_sideband_suppression_db"] == pytest.approx(30.0, abs=0.2)  # the overall figure stays


def test_band_ends_are_inside():
    # Both ends belong to the band (common practice, no source): a tone on an edge counts.
    pts = [{"tone_hz": 300.0, "sideband_suppression_db": 40.0, "unwanted_detected": True},
           {"tone_hz": 3000.0, "sideband_suppression_db": 35.0, "unwanted_detected": False},
           {"tone_hz": 3000.5, "sideband_suppression_db": 20.0, "unwanted_detected": True},
           {"tone_hz": 1000.0, "sideband_suppression_db": None, "unwanted_detected": False}]
    assert worst_in_band(pts, (300.0, 3000.0)) == {"tone_hz": 3000.0, "sideband_suppression_db": 35.0,
                                                     "is_lower_bound": True}
    assert worst_in_band(pts[3:], (300.0, 3000.0)) is None  # a point without a figure is no worst


@pytest.mark.parametrize("band", [(3000.0, 300.0), (300.0, 300.0), (0.0, 3000.0), (-5.0, 3000.0),
                                  (float("nan"), 3000.0), (300.0,)])
def test_bad_band_is_a_measurement_error(band):
    with pytest.raises(MeasurementError, match="--band"):
        SidebandMeasurement().measure(capture_of(capture_samples()).view(),
                                      {"tone": [1000.0], "carrier": CARRIER, "band": list(band)})


def test_cli_band_json_and_text(tmp_path, capsys):
    wav = write_wav(tmp_path / "sb.wav", capture_samples())
    code, out, err = run(cli_argv(wav, "--band", 1500, 3500, "--json"), capsys)
    assert (code, err) == (0, "")
    r = json.loads(out)
    assert r["band_hz"] == [1500.0, 3500.0]
    # In 1500-3500 Hz: 2000 (45), 2900 (38), 3400 (33) -> 33 dB at 3400 Hz (injected levels).
    assert r["worst_in_band"]["tone_hz"] == 3400.0
    assert r["worst_in_band"]["sideband_suppression_db"] == pytest.approx(33.0, abs=0.2)
    assert r["worst_sideband_suppression_db"] == pytest.approx(30.0, abs=0.2)
    code, out, err = run(cli_argv(wav), capsys)
    assert (code, err) == (0, "")
    assert "worst in 300–3000 Hz: 38.0 dB at 2900 Hz" in out
    code, out, err = run(cli_argv(wav, "--band", 900, 1100), capsys)
    assert code == 0
    line = next(x for x in out.splitlines() if x.startswith("worst in 900–1100 Hz"))
    assert "at least" in line and "(unwanted not detected)" in line


@pytest.mark.parametrize("band", [("3000", "300"), ("0", "3000"), ("-5", "3000"), ("300",), ("300", "x")])
def test_cli_bad_band_is_one_line(band, tmp_path, capsys):
    wav = write_wav(tmp_path / "sb.wav", capture_samples())
    code, out, err = run(cli_argv(wav, "--band", *band, "--json"), capsys)
    assert code != 0 and out == ""
    assert len(err.splitlines()) == 1 and err.startswith("rtanalyzer: error: ") and "--band" in err


def test_docstring_example_runs():
    # The example must hold as written (doctest); its answer is the definition worked by hand.
    import doctest

    runner = doctest.DocTestRunner()
    for test in doctest.DocTestFinder().find(worst_in_band, "worst_in_band", globs={"worst_in_band": worst_in_band}):
        runner.run(test)
    assert runner.failures == 0 and runner.tries > 0
