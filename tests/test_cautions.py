"""The safety cautions: shown once per user, never fatal, and printed on request."""

from __future__ import annotations

import argparse
import io
import os

import pytest

from rtanalyzer.cli import cautions


@pytest.fixture
def config_dir(tmp_path, monkeypatch):
    target = tmp_path / "config"
    monkeypatch.setenv(cautions.CONFIG_DIR_ENV, str(target))
    return target


def test_text_is_short_and_covers_the_points():
    lines = cautions.CAUTIONS.strip().splitlines()
    assert len(lines) <= 15
    text = " ".join(cautions.CAUTIONS.split()).lower()
    for phrase in (
        "dummy load",
        "attenuator",
        "never connect rf",
        "check your card's specification",
        "rf exposure",
        "mains",
        "licence",
        "does not replace local codes and regulations",
    ):
        assert phrase in text, phrase


def test_first_run_notice_is_shown_once(config_dir):
    first, second = io.StringIO(), io.StringIO()
    assert cautions.show_first_run_notice(first) is True
    assert cautions.CAUTIONS in first.getvalue()
    assert cautions.show_first_run_notice(second) is False
    assert second.getvalue() == ""
    assert any(config_dir.iterdir())


def test_unwritable_config_dir_prints_every_time(tmp_path, monkeypatch):
    # A folder that can never be created (its parent is a file) fails even for root.
    blocker = tmp_path / "plain-file"
    blocker.write_text("x")
    monkeypatch.setenv(cautions.CONFIG_DIR_ENV, str(blocker / "config"))
    for _ in range(2):
        out = io.StringIO()
        assert cautions.show_first_run_notice(out) is True
        assert cautions.CAUTIONS in out.getvalue()


@pytest.mark.skipif(not hasattr(os, "geteuid") or os.geteuid() == 0, reason="root ignores permission bits")
def test_read_only_config_dir_prints_every_time(config_dir):
    config_dir.mkdir()
    os.chmod(config_dir, 0o555)
    try:
        for _ in range(2):
            out = io.StringIO()
            assert cautions.show_first_run_notice(out) is True
    finally:
        os.chmod(config_dir, 0o755)


def test_default_dir_comes_from_platformdirs(monkeypatch):
    monkeypatch.delenv(cautions.CONFIG_DIR_ENV, raising=False)
    from platformdirs import user_config_dir

    assert str(cautions.config_dir()) == user_config_dir("rtanalyzer", appauthor=False)


def test_cautions_command_prints_and_returns_zero(capsys, config_dir):
    parser = argparse.ArgumentParser()
    cautions.add_parser(parser.add_subparsers(dest="command"))
    args = parser.parse_args(["cautions"])
    assert args.func(args) == 0
    assert capsys.readouterr().out == cautions.CAUTIONS
