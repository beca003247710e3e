"""Sound-file reading and writing: every bad input is one clear line; good files round-trip.

Outside reference: scipy.io.wavfile, an independent WAV reader/writer (it does not use
libsndfile), is used to read what we write and to write what we read.
"""

from __future__ import annotations

import hashlib
import os
import struct
import sys
import time

import numpy as np
import pytest
import soundfile as sf
from scipy.io import wavfile as scipy_wav

from rtanalyzer.errors import CaptureError
from rtanalyzer.sources.wavfile import read_capture, write_capture

RATES = (8000, 44100, 96000, 192000)
WAV_SUBTYPES = ("PCM_U8", "PCM_16", "PCM_24", "PCM_32", "FLOAT", "DOUBLE")
FLAC_SUBTYPES = ("PCM_S8", "PCM_16", "PCM_24")
LSB = {"PCM_U8": 2.0**-7, "PCM_S8": 2.0**-7, "PCM_16": 2.0**-15, "PCM_24": 2.0**-23, "PCM_32": 2.0**-31}
FORMAT_TEXT = {
    "PCM_U8": "8-bit PCM",
    "PCM_S8": "8-bit PCM",
    "PCM_16": "16-bit PCM",
    "PCM_24": "24-bit PCM",
    "PCM_32": "32-bit PCM",
    "FLOAT": "32-bit float",
    "DOUBLE": "64-bit float",
}


def _test_signal(rate: int, frames: int = 2048, channels: int = 2) -> np.ndarray:
    """Two tones plus noise, peak below 0.99 full scale, different on each channel."""
    rng = np.random.default_rng(rate)
    t = np.arange(frames) / rate
    cols = []
    for ch in range(channels):
        f1, f2 = 0.031 * rate * (ch + 1), 0.087 * rate
        x = 0.45 * np.sin(2 * np.pi * f1 * t + ch) + 0.4 * np.sin(2 * np.pi * f2 * t)
        cols.append(x + 0.05 * rng.uniform(-1, 1, frames))
    return np.stack(cols, axis=1)


def _fingerprint(path) -> tuple:
    st = os.stat(path)
    with open(path, "rb") as fh:
        return hashlib.sha256(fh.read()).hexdigest(), st.st_size, st.st_mtime_ns, st.st_mode


# ---------------------------------------------------------------------------------------------
# Bad input: one line, naming the file and the fault; the file is left exactly as it was.
# ---------------------------------------------------------------------------------------------


def _make_wav_bytes(tmp_path) -> bytes:
    p = tmp_path / "good_for_cutting.wav"
    sf.write(p, np.zeros(1000), 48000, subtype="PCM_16")
    return p.read_bytes()


def _bad_empty(tmp_path):
    p = tmp_path / "empty.wav"
    p.write_bytes(b"")
    return p, "empty"


def _bad_random(tmp_path):
    p = tmp_path / "noise.wav"
    p.write_bytes(os.urandom(4 * 1024 * 1024))
    return p, "not a sound file"


def _bad_text(tmp_path):
    p = tmp_path / "notes.wav"
    p.write_text("Bench notes: carrier null at 1.2 kHz offset, tweak R7 next.\n" * 40, encoding="utf-8")
    return p, "text file"


def _bad_truncated_header(tmp_path):
    p = tmp_path / "cut.wav"
    p.write_bytes(_make_wav_bytes(tmp_path)[:20])
    return p, "header is damaged or truncated"


def _bad_riff_garbage(tmp_path):
    p = tmp_path / "riffjunk.wav"
    p.write_bytes(b"RIFF" + os.urandom(200_000))
    return p, "header is damaged or truncated"


def _bad_zero_frames(tmp_path):
    p = tmp_path / "silent.wav"
    p.write_bytes(_make_wav_bytes(tmp_path)[:44])  # canonical 44-byte header, no data
    info = sf.info(p)  # outside check that the header itself is valid
    assert info.frames == 0 and info.samplerate == 48000
    return p, "no audio frames"


def _bad_nan(tmp_path):
    p = tmp_path / "nan.wav"
    x = np.sin(np.linspace(0, 50, 4800)) * 0.5
    x[1234] = np.nan
    sf.write(p, x, 48000, subtype="FLOAT")
    return p, "NaN or infinite"


def _bad_inf(tmp_path):
    p = tmp_path / "inf.wav"
    x = np.zeros((4800, 2))
    x[10, 1] = np.inf
    sf.write(p, x, 48000, subtype="DOUBLE")
    return p, "NaN or infinite"


def _bad_rate_low(tmp_path):
    p = tmp_path / "slow.wav"
    sf.write(p, np.zeros(400), 4000, subtype="PCM_16")
    return p, "4000 Hz is outside the supported 8000-192000 Hz"


def _bad_rate_high(tmp_path):
    p = tmp_path / "fast.wav"
    sf.write(p, np.zeros(4000), 384000, subtype="PCM_24")
    return p, "384000 Hz is outside the supported 8000-192000 Hz"


def _bad_lossy(tmp_path):
    p = tmp_path / "ulaw.wav"
    sf.write(p, np.zeros(4800), 8000, subtype="ULAW")
    return p, "lossy or companded"


def _bad_directory(tmp_path):
    p = tmp_path / "a_folder.wav"
    p.mkdir()
    return p, "is a directory"


BAD_FILES = {
    "empty": _bad_empty,
    "random_bytes": _bad_random,
    "text": _bad_text,
    "header_cut_at_20": _bad_truncated_header,
    "riff_then_garbage": _bad_riff_garbage,
    "zero_frames": _bad_zero_frames,
    "nan": _bad_nan,
    "inf": _bad_inf,
    "rate_4k": _bad_rate_low,
    "rate_384k": _bad_rate_high,
    "ulaw": _bad_lossy,
}


@pytest.mark.parametrize("case", sorted(BAD_FILES))
def test_bad_file_is_one_clear_line(tmp_path, case):
    path, expected = BAD_FILES[case](tmp_path)
    before = _fingerprint(path)
    start = time.monotonic()
    with pytest.raises(CaptureError) as info:
        read_capture(path)
    elapsed = time.monotonic() - start
    message = str(info.value)
    assert "\n" not in message
    assert str(path) in message
    assert expected in message
    assert info.value.__cause__ is None  # nothing chained that a trace would show
    assert elapsed < 5.0
    assert _fingerprint(path) == before  # never modified


def test_missing_file(tmp_path):
    path = tmp_path / "nowhere.wav"
    with pytest.raises(CaptureError, match="no such file") as info:
        read_capture(path)
    assert str(path) in str(info.value)
    assert not path.exists()


def test_directory(tmp_path):
    path, expected = _bad_directory(tmp_path)
    with pytest.raises(CaptureError, match=expected) as info:
        read_capture(path)
    assert str(path) in str(info.value) and "\n" not in str(info.value)
    assert path.is_dir()


@pytest.mark.skipif(not os.path.exists("/dev/zero"), reason="needs /dev/zero")
def test_device_is_refused_quickly():
    start = time.monotonic()
    with pytest.raises(CaptureError, match="not a regular file"):
        read_capture("/dev/zero")
    assert time.monotonic() - start < 5.0


@pytest.mark.skipif(not hasattr(os, "fork") or sys.platform == "win32", reason="POSIX permissions")
def test_unreadable_file(tmp_path):
    path = tmp_path / "locked.wav"
    sf.write(path, np.zeros(480), 48000, subtype="PCM_16")
    before = _fingerprint(path)
    os.chmod(path, 0)
    try:
        if os.geteuid() != 0:
            with pytest.raises(CaptureError) as info:
                read_capture(path)
            message = str(info.value)
        else:
            # root reads anything, so try as an unprivileged user in a forked child: it keeps
            # this process's imports, and works from inside the folder (made searchable).
            os.chmod(tmp_path, 0o711)
            read_end, write_end = os.pipe()
            pid = os.fork()
            if pid == 0:  # child
                code = 1
                try:
                    os.close(read_end)
                    os.chdir(tmp_path)
                    os.setgid(65534)
                    os.setuid(65534)
                    try:
                        read_capture(path.name)
                        text = "READ OK"
                    except CaptureError as exc:
                        text = str(exc)
                    os.write(write_end, text.encode())
                    code = 0
                finally:
                    os._exit(code)
            os.close(write_end)
            with os.fdopen(read_end, "rb") as fh:
                message = fh.read().decode()
            _, status = os.waitpid(pid, 0)
            assert os.WEXITSTATUS(status) == 0, "child could not drop privileges"
        assert "permission denied" in message
        assert path.name in message and "\n" not in message
    finally:
        os.chmod(path, 0o644)
    assert _fingerprint(path)[:2] == before[:2]


def test_wav_with_overstated_length_reads_what_is_there(tmp_path):
    # A recording cut short: the data chunk claims far more than the file holds.
    path = tmp_path / "short.wav"
    x = (np.arange(200) % 50 - 25).astype(np.int16) * 100
    sf.write(path, x, 48000, subtype="PCM_16")
    raw = bytearray(path.read_bytes())
    assert raw[36:40] == b"data"
    raw[40:44] = struct.pack("<I", 0x7FFFFF00)
    path.write_bytes(bytes(raw))
    start = time.monotonic()
    cap = read_capture(path)
    assert time.monotonic() - start < 5.0
    np.testing.assert_array_equal(cap.samples[:, 0], x / 32768.0)


# ---------------------------------------------------------------------------------------------
# Good files: round trips within one LSB, cross-checked with an independent reader.
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize("rate", RATES)
@pytest.mark.parametrize(
    "container,subtype",
    [("wav", s) for s in WAV_SUBTYPES] + [("flac", s) for s in FLAC_SUBTYPES],
)
def test_round_trip(tmp_path, container, subtype, rate):
    x = _test_signal(rate)
    path = tmp_path / f"rt.{container}"
    write_capture(path, x, rate, subtype)
    cap = read_capture(path)
    assert cap.rate_hz == rate
    assert cap.frames == x.shape[0] and cap.channels == x.shape[1]
    assert cap.source == str(path)
    assert cap.sample_format == f"{FORMAT_TEXT[subtype]} {container.upper()}"
    assert cap.full_scale_lsb == LSB.get(subtype, 0.0)
    tolerance = {"FLOAT": 2.0**-24, "DOUBLE": 0.0}.get(subtype, LSB.get(subtype))
    assert np.max(np.abs(cap.samples - x)) <= tolerance
    assert cap.clipped == (False, False)
    assert not list(tmp_path.glob("*.part"))  # no temporary left behind


@pytest.mark.filterwarnings("ignore:Chunk .non-data. not understood")  # libsndfile's PEAK chunk
@pytest.mark.parametrize("subtype", WAV_SUBTYPES)
def test_written_wav_matches_scipy_reader(tmp_path, subtype):
    # Reference: scipy.io.wavfile.read returns the stored integers (uint8 offset by 128 for
    # 8-bit, 24-bit left-justified in int32) or the stored floats, untouched.
    rate = 48000
    x = _test_signal(rate)
    path = tmp_path / "ref.wav"
    write_capture(path, x, rate, subtype)
    ref_rate, raw = scipy_wav.read(path)
    assert ref_rate == rate
    if raw.dtype == np.uint8:
        expected = (raw.astype(np.float64) - 128.0) / 128.0
    elif raw.dtype == np.int16:
        expected = raw / 2.0**15
    elif raw.dtype == np.int32:
        expected = raw / 2.0**31
    else:
        expected = raw.astype(np.float64)
    cap = read_capture(path)
    np.testing.assert_array_equal(cap.samples, expected)
    if subtype in LSB:
        assert np.max(np.abs(expected - x)) <= LSB[subtype]


@pytest.mark.parametrize("dtype", ["int16", "float32", "float64"])
@pytest.mark.parametrize("rate", RATES)
def test_reads_scipy_written_wav(tmp_path, dtype, rate):
    x = _test_signal(rate, channels=1)[:, 0]
    if dtype == "int16":
        stored = np.round(x * 32767).astype(np.int16)
        expected = stored / 32768.0
        text, lsb = "16-bit PCM WAV", 2.0**-15
    else:
        stored = x.astype(dtype)
        expected = stored.astype(np.float64)
        text, lsb = f"{np.dtype(dtype).itemsize * 8}-bit float WAV", 0.0
    path = tmp_path / "scipy.wav"
    scipy_wav.write(path, rate, stored)
    cap = read_capture(path)
    assert cap.sample_format == text and cap.full_scale_lsb == lsb and cap.rate_hz == rate
    np.testing.assert_array_equal(cap.samples[:, 0], expected)


def test_many_channels(tmp_path):
    x = _test_signal(48000, channels=6)
    path = tmp_path / "six.wav"
    write_capture(path, x, 48000, "PCM_24")
    cap = read_capture(path)
    assert cap.channels == 6
    assert np.max(np.abs(cap.samples - x)) <= 2.0**-23


# ---------------------------------------------------------------------------------------------
# Clip flags
# ---------------------------------------------------------------------------------------------


def test_full_scale_square_is_clipped_and_minus_one_dbfs_sine_is_not(tmp_path):
    rate = 48000
    t = np.arange(rate // 10) / rate
    # A 16-bit square wave at the format's extremes, written by the reference writer.
    square = np.where(np.sin(2 * np.pi * 500 * t) >= 0, 32767, -32768).astype(np.int16)
    # A sine at -1 dBFS (peak 10**(-1/20) of full scale; dBFS per AES17).
    sine = np.round(10 ** (-1 / 20) * 32767 * np.sin(2 * np.pi * 997 * t)).astype(np.int16)
    path = tmp_path / "clip.wav"
    scipy_wav.write(path, rate, np.stack([square, sine], axis=1))
    cap = read_capture(path)
    assert cap.clipped == (True, False)
    assert cap.view(channel=1).clipped and not cap.view(channel=2).clipped


def test_float_beyond_full_scale_is_clipped(tmp_path):
    path = tmp_path / "hot.wav"
    x = 1.2 * np.sin(2 * np.pi * 1000 * np.arange(4800) / 48000)
    write_capture(path, x, 48000, "FLOAT")
    cap = read_capture(path)
    assert cap.clipped == (True,)
    assert np.max(cap.samples) == pytest.approx(1.2, abs=1e-6)  # float keeps the overs


def test_integer_write_saturates_instead_of_wrapping(tmp_path):
    path = tmp_path / "sat.wav"
    write_capture(path, np.array([1.5, -1.5, 0.25]), 8000, "PCM_16")
    _, raw = scipy_wav.read(path)
    assert raw.tolist() == [32767, -32768, 8192]


# ---------------------------------------------------------------------------------------------
# Writer refusals
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    "name,subtype,rate,samples,expected",
    [
        ("x.xyz", "PCM_16", 48000, np.zeros(10), "unknown sound file extension"),
        ("x.wav", "PCM_12", 48000, np.zeros(10), "subtype 'PCM_12' is not supported"),
        ("x.flac", "FLOAT", 48000, np.zeros(10), "cannot hold FLOAT"),
        ("x.wav", "PCM_16", 4000, np.zeros(10), "rate_hz 4000"),
        ("x.wav", "PCM_16", 48000.5, np.zeros(10), "whole number"),
        ("x.wav", "PCM_16", 48000, np.zeros(0), "non-empty"),
        ("x.wav", "FLOAT", 48000, np.array([0.0, np.nan]), "NaN or infinite"),
    ],
)
def test_write_refusals(tmp_path, name, subtype, rate, samples, expected):
    path = tmp_path / name
    with pytest.raises(CaptureError, match=expected) as info:
        write_capture(path, samples, rate, subtype)
    assert "\n" not in str(info.value)
    assert not path.exists()


def test_failed_write_keeps_existing_file(tmp_path):
    path = tmp_path / "keep.wav"
    write_capture(path, np.full(100, 0.5), 48000, "PCM_16")
    before = _fingerprint(path)
    with pytest.raises(CaptureError):
        write_capture(path, np.array([np.inf]), 48000, "PCM_16")
    assert _fingerprint(path) == before
