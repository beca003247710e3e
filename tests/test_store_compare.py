"""Before/after comparison: changes, their direction, bounds, group means and the cautions it raises."""

from __future__ import annotations

import numpy as np
import pytest

from rtanalyzer.store import StoreError, compare, render_comparison, spectrum_arrays
from rtanalyzer.store.comparison import AT_LEAST, AT_MOST, EXACT
from test_store import sideband_result, snapshot, twotone_result


def test_larger_suppression_is_better():
    c = compare([snapshot(sideband_result(32.4, 46.2))], [snapshot(sideband_result(41.0, 44.0))], "#1", "#2")
    worst = c.figure("worst_sideband_suppression_db")
    assert worst.change_db == pytest.approx(8.6)  # 41.0 - 32.4 (arithmetic)
    assert (worst.verdict, worst.text) == ("better", "better by 8.6 dB")
    carrier = c.figure("carrier_suppression_db")
    assert (carrier.verdict, carrier.text) == ("worse", "worse by 2.2 dB")
    assert c.figure("sideband_suppression_db@1000").verdict == "better"
    assert c.figure("noise_floor_dbfs").verdict == "no change"
    assert c.flags == ()


def test_more_negative_imd_is_better():
    c = compare([snapshot(twotone_result(-30.0))], [snapshot(twotone_result(-35.5))])
    f = c.figure("imd3_worst_db_pep")
    assert f.change_db == pytest.approx(-5.5) and f.text == "better by 5.5 dB"  # (arithmetic)
    assert c.figure("imd3_worst_dbc").verdict == "better"
    assert c.figure("worst_imd_db_pep").verdict == "better"
    assert c.figure("imd5_worst_db_pep").verdict == "no change"


@pytest.mark.parametrize(
    "a,a_bound,b,b_bound,kind,verdict,words",
    [
        # B's unwanted is under the noise: B >= 55, A = 40, so the change is >= 15 (arithmetic)
        (40.0, False, 55.0, True, AT_LEAST, "better", "better by at least 15.0 dB"),
        # A >= 55, B = 50: change <= -5
        (55.0, True, 50.0, False, AT_MOST, "worse", "worse by at least 5.0 dB"),
        # A >= 50, B = 55: change <= +5, could be anything below
        (50.0, True, 55.0, False, AT_MOST, "unknown", "at best 5.0 dB better"),
        # both only bounds in the same sense: nothing can be said
        (50.0, True, 55.0, True, "unknown", "unknown", "no change can be stated"),
    ],
)
def test_a_bound_makes_the_change_a_bound(a, a_bound, b, b_bound, kind, verdict, words):
    c = compare([snapshot(sideband_result(a, unwanted_detected=not a_bound))],
                [snapshot(sideband_result(b, unwanted_detected=not b_bound))])
    f = c.figure("worst_sideband_suppression_db")
    assert (f.change_kind, f.verdict) == (kind, verdict)
    assert words in f.text
    if kind != EXACT and kind != "unknown":
        assert "bound" in f.text


def test_imd_under_the_noise_after_the_fix():
    # B's IMD3 is under the noise: B <= -60, A = -40, so the change <= -20: better by at least 20 (arithmetic)
    c = compare([snapshot(twotone_result(-40.0))], [snapshot(twotone_result(-60.0, imd3_bound=True))])
    f = c.figure("imd3_worst_db_pep")
    assert (f.change_kind, f.verdict) == (AT_MOST, "better")
    assert f.text.startswith("better by at least 20.0 dB")
    assert f.b.kind == AT_MOST


def test_groups_are_averaged_in_db_with_their_spread():
    a = [snapshot(sideband_result(v)) for v in (30.0, 32.0, 34.0)]
    b = [snapshot(sideband_result(v)) for v in (35.0, 36.0)]
    c = compare(a, b, "tag:before", "tag:after")
    f = c.figure("worst_sideband_suppression_db")
    # mean 32, sample standard deviation 2 (arithmetic); mean 35.5, sd 0.707
    assert (f.a.value, f.a.spread_db, f.a.n, f.a.low, f.a.high) == pytest.approx((32.0, 2.0, 3, 30.0, 34.0))
    assert (f.b.value, f.b.spread_db) == pytest.approx((35.5, np.sqrt(0.5)))
    assert f.change_db == pytest.approx(3.5) and f.verdict == "better"
    assert "mean of 3" in f.a.text("dB")
    small = compare(a, [snapshot(sideband_result(33.0))]).figure("worst_sideband_suppression_db")
    assert "within the groups' spread" in small.text
    # a group with one member only under the noise gives an "at least" mean
    mixed = compare(a, [snapshot(sideband_result(40.0)), snapshot(sideband_result(44.0, unwanted_detected=False))])
    assert mixed.figure("worst_sideband_suppression_db").b.kind == AT_LEAST


def test_cautions_for_different_plans_bandwidths_drive_and_rigs():
    a = snapshot(sideband_result(carrier_hz=4007.3), tones=(1000.0,))
    b = snapshot(sideband_result(carrier_hz=4107.3, bandwidth=11.7), tones=(1000.0, 2000.0), rig="other")
    flags = " | ".join(compare([a], [b], "#1", "#2").flags)
    assert "different plans: tones 1000 Hz in #1, 1000+2000 Hz in #2" in flags
    assert "carrier lands at 4007.3 Hz in #1 and 4107.3 Hz in #2" in flags
    assert "analysis bandwidths" in flags and "different rigs" in flags
    drive = compare([snapshot(twotone_result(pep=-7.9))], [snapshot(twotone_result(pep=-10.9))]).flags
    assert any("different drive" in f for f in drive)
    clipped = compare([snapshot()], [snapshot(clipped=True, id=7)]).flags
    assert any("clipped capture in #7" in f for f in clipped)


def test_unlike_measurements_are_refused():
    with pytest.raises(StoreError, match="sideband measurement and #2 a twotone"):
        compare([snapshot()], [snapshot(twotone_result())], "#1", "#2")
    with pytest.raises(StoreError, match="mixes measurements"):
        compare([snapshot(), snapshot(twotone_result())], [snapshot()], "tag:x", "#3")
    with pytest.raises(StoreError, match="no snapshots"):
        compare([], [snapshot()])


def test_missing_figure_is_said_not_invented():
    two_tones = snapshot(sideband_result(tones=(1000.0, 2000.0)), tones=(1000.0, 2000.0))
    c = compare([snapshot()], [two_tones], "#1", "#2")
    f = c.figure("sideband_suppression_db@2000")
    assert (f.verdict, f.text, f.change_db) == ("missing", "not in #1", None)


def test_text_and_json_forms():
    c = compare([snapshot(sideband_result(32.36))], [snapshot(sideband_result(34.51))], "tag:before", "tag:after")
    text = render_comparison(c)
    assert "worst opposite-sideband suppression" in text and "+2.1 dB" in text and "better by 2.1 dB" in text
    js = c.to_json()
    assert js["figures"][1]["change_db"] == pytest.approx(2.15) and js["a"]["selector"] == "tag:before"


def test_spectrum_arrays_for_overlays():
    s = snapshot()
    f, db = spectrum_arrays(s)
    assert f.shape == db.shape == (4096,) and np.all(np.diff(f) > 0) and db.dtype == np.float64
    with pytest.raises(StoreError, match="no stored spectrum"):
        spectrum_arrays(snapshot(spectrum=None))
