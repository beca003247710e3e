"""Shared fixtures: synthetic captures built from known components, WAV helpers, a private config dir.

Levels follow the project's conventions (AES17): a real sine of peak A is 20*log10(A) dBFS; in an
I/Q capture a complex tone whose I and Q are each a sine of peak A is also 20*log10(A) dBFS.
"""

from __future__ import annotations

import hashlib
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

from rtanalyzer.dsp.window import figures
from rtanalyzer.sources.capture import Capture


@pytest.fixture(autouse=True)
def _private_config_dir(tmp_path_factory, monkeypatch):
    """No test may write to the real home: point the per-user configuration folder at a tmp dir."""
    monkeypatch.setenv("RTANALYZER_CONFIG_DIR", str(tmp_path_factory.mktemp("config")))


@pytest.fixture(autouse=True)
def _private_history_store(tmp_path_factory, monkeypatch):
    """Nor to the real history: point the snapshot store at a tmp file (tests may set their own)."""
    monkeypatch.setenv("RTANALYZER_STORE", str(tmp_path_factory.mktemp("store") / "history.sqlite3"))


@pytest.fixture
def cautions_already_shown():
    """The per-user first-run safety notice counts as shown (in the private config dir), so
    stderr carries only what a command itself prints."""
    import io

    from rtanalyzer.cli.cautions import show_first_run_notice

    show_first_run_notice(io.StringIO())
    assert show_first_run_notice(io.StringIO()) is False


def amplitude(dbfs: float) -> float:
    """Peak amplitude of a sine at ``dbfs`` (0 dBFS = peak 1.0, AES17)."""
    return 10.0 ** (dbfs / 20.0)


def sigma_for_bin_level(level_dbfs: float, nfft: int, iq: bool = False) -> float:
    """Per-channel RMS of white noise that reads ``level_dbfs`` per bin in our spectrum.

    Derivation (first principles, not from the code under test): white noise of variance s**2
    sampled at fs has one-sided density 2*s**2/fs (real) and two-sided density 2*s**2/fs
    (complex, I and Q each of variance s**2). Its power in one bin's equivalent noise bandwidth
    ENBW_Hz = enbw_bins*fs/nfft is P = 2*s**2*enbw_bins/nfft either way. A real sine of peak A
    has power A**2/2, so the sine of equal power reads A**2 = 2*P = 4*s**2*enbw/nfft; a complex
    tone of amplitude A has power A**2, so A**2 = P = 2*s**2*enbw/nfft.
    """
    enbw = figures(nfft).enbw_bins
    p = 10.0 ** (level_dbfs / 10.0)
    return float(np.sqrt(p * nfft / ((2.0 if iq else 4.0) * enbw)))


def synth(
    components,
    rate: float = 48000,
    seconds: float = 1.0,
    noise_rms: float = 0.0,
    seed: int = 0,
    iq: bool = False,
    dc: float = 0.0,
) -> np.ndarray:
    """Samples from ``components`` = [(frequency_hz, dBFS, phase_rad), ...] plus seeded white noise.

    Real: sum of A*cos(2*pi*f*t + phase), shape (frames,). I/Q: sum of A*exp(j(2*pi*f*t + phase))
    with f of either sign, returned as (frames, 2) = I, Q. ``noise_rms`` is per channel.
    """
    frames = int(round(rate * seconds))
    t = np.arange(frames) / float(rate)
    rng = np.random.default_rng(seed)
    if iq:
        z = np.zeros(frames, dtype=np.complex128)
        for f, level, phase in components:
            z += amplitude(level) * np.exp(1j * (2 * np.pi * f * t + phase))
        if noise_rms:
            z += noise_rms * (rng.standard_normal(frames) + 1j * rng.standard_normal(frames))
        z += dc * (1 + 1j)
        return np.column_stack([z.real, z.imag])
    x = np.zeros(frames)
    for f, level, phase in components:
        x += amplitude(level) * np.cos(2 * np.pi * f * t + phase)
    if noise_rms:
        x += noise_rms * rng.standard_normal(frames)
    return x + dc


def capture_of(samples: np.ndarray, rate: float = 48000) -> Capture:
    return Capture(np.asarray(samples, dtype=np.float64), float(rate))


def write_wav(path: Path, samples: np.ndarray, rate: int = 48000, subtype: str = "FLOAT") -> Path:
    """Write with soundfile directly (not the code under test), float by default so nothing is quantized."""
    sf.write(str(path), np.asarray(samples), int(rate), subtype=subtype, format="WAV")
    return path


def run_cli(argv, capsys) -> tuple[int, str, str]:
    """Run the ``rtanalyzer`` command line in-process: (exit code, stdout, stderr)."""
    from rtanalyzer.cli.main import main

    code = main([str(a) for a in argv])
    out = capsys.readouterr()
    return code, out.out, out.err


def file_digest(path: Path) -> str | None:
    """SHA-256 of a file's bytes, or None when it does not exist."""
    try:
        return hashlib.sha256(Path(path).read_bytes()).hexdigest()
    except FileNotFoundError:
        return None


@pytest.fixture(autouse=True)
def _qt_objects_die_on_the_gui_thread(request):
    """In window tests, collect garbage only on the GUI thread, between tests.

    Python's cyclic collector runs in whichever thread happens to allocate; a window left in a
    reference cycle by one test could then be destroyed from the analysis thread of the next,
    and Qt objects must die on the thread that owns them (Qt documentation, thread affinity).
    """
    if "qtbot" not in request.fixturenames and "qapp" not in request.fixturenames:
        yield
        return
    import gc

    gc.disable()
    try:
        yield
    finally:
        from PyQt6.QtWidgets import QApplication

        app = QApplication.instance()
        if app is not None:
            app.processEvents()
        gc.collect()
        if app is not None:
            app.processEvents()
        gc.enable()
