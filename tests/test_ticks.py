"""Axis tick labels: each label states its tick's value exactly (arithmetic, no source needed)."""

from __future__ import annotations

import pytest

from rtanalyzer.gui.ticks import MINUS, format_number, value_ticks


@pytest.mark.parametrize("lo,hi,target", [(30.0, 40.0, 4), (0.0, 1.0, 4), (-0.5, 0.5, 4), (0.0, 10.0, 4),
                                          (100.0, 200.0, 4), (-1.0, 1.0, 8)])
def test_every_label_reads_back_as_its_tick(lo, hi, target):
    major, _, labels = value_ticks(target)(lo, hi)
    assert len(major) >= 2
    for value, label in zip(major, labels):
        assert float(label.replace(MINUS, "-")) == pytest.approx(value, abs=1e-9)


def test_a_quarter_step_keeps_two_decimals_and_no_negative_zero():
    assert format_number(0.25, 0.25) == "0.25" and format_number(37.5, 2.5) == "37.5"
    assert format_number(-1e-12, 0.5) == "0.0" and format_number(-2.0, 1.0) == f"{MINUS}2"
