"""Reading and writing captures as sound files (WAV, FLAC and the other containers libsndfile reads).

Samples are exchanged as float64 with digital full scale 1.0, the scale a :class:`Capture` holds.
Every problem with a file becomes one :class:`~rtanalyzer.errors.CaptureError` line that names the
file and what is wrong with it; the input file is only ever opened for reading.

Integer formats are read with libsndfile's normalisation (a 16-bit sample ``s`` becomes
``s / 2**15``), so positive full scale reads as ``1 - 2**-15``. Writing quantizes here, not in
libsndfile: ``round(x * 2**(bits-1))`` clipped to the format's range, so a value read back is
within half a step of what was written, and values beyond full scale saturate instead of
wrapping around.
"""

from __future__ import annotations

import os
import secrets
import stat
from pathlib import Path

import numpy as np

from rtanalyzer.errors import CaptureError
from rtanalyzer.sources.capture import MAX_RATE_HZ, MIN_RATE_HZ, Capture

# Subtype -> (bits, one quantization step relative to full scale; 0.0 for floating point).
_SUBTYPES: dict[str, tuple[int, float]] = {
    "PCM_U8": (8, 2.0**-7),
    "PCM_S8": (8, 2.0**-7),
    "PCM_16": (16, 2.0**-15),
    "PCM_24": (24, 2.0**-23),
    "PCM_32": (32, 2.0**-31),
    "FLOAT": (32, 0.0),
    "DOUBLE": (64, 0.0),
}

# Container names as libsndfile reports them -> words for people.
_CONTAINERS = {
    "WAV": "WAV",
    "WAVEX": "WAV",
    "RF64": "RF64 WAV",
    "W64": "Wave64",
    "FLAC": "FLAC",
    "AIFF": "AIFF",
    "CAF": "CAF",
}

#: Longest capture read, in samples over all channels (about 1 GiB as float64): 10 minutes of
#: stereo at 96 kHz fits; a header claiming more is refused before anything is allocated.
MAX_SAMPLES = 2**27

_READ_BLOCK_FRAMES = 1 << 20


def _soundfile():
    """Import soundfile, turning a missing package or library into a one-line error."""
    try:
        import soundfile
    except ImportError as exc:  # ModuleNotFoundError, or no libsndfile found by the binding
        raise CaptureError(
            f"cannot read or write sound files: the 'soundfile' package is unusable ({exc}); "
            "install it with: pip install soundfile"
        ) from None
    except OSError as exc:  # the binding found no libsndfile
        raise CaptureError(
            f"cannot read or write sound files: libsndfile is missing ({exc}); "
            "install it with: pip install --force-reinstall soundfile (or apt-get install libsndfile1)"
        ) from None
    return soundfile


def describe_format(container: str, subtype: str) -> str:
    """Short human text for a file's encoding, e.g. ``"16-bit PCM WAV"`` or ``"32-bit float FLAC"``."""
    where = _CONTAINERS.get(container, container)
    if subtype in ("FLOAT", "DOUBLE"):
        return f"{_SUBTYPES[subtype][0]}-bit float {where}"
    if subtype in _SUBTYPES:
        return f"{_SUBTYPES[subtype][0]}-bit PCM {where}"
    return f"{subtype} {where}"


def _looks_like_text(head: bytes) -> bool:
    if not head or b"\x00" in head:
        return False
    try:
        text = head.decode("utf-8")
    except UnicodeDecodeError:
        # A multi-byte character cut at the end of the sample still counts as text.
        try:
            text = head[:-3].decode("utf-8")
        except UnicodeDecodeError:
            return False
    return all(ch.isprintable() or ch in "\r\n\t\f" for ch in text)


def _check_path(path: Path) -> bytes:
    """Open ``path`` read-only, check it is a non-empty regular file, return its first bytes."""
    name = str(path)
    try:
        st = os.stat(path)
    except FileNotFoundError:
        raise CaptureError(f"{name}: no such file") from None
    except PermissionError:
        raise CaptureError(f"{name}: permission denied (cannot reach the file)") from None
    except OSError as exc:
        raise CaptureError(f"{name}: cannot access the file ({exc.strerror or exc})") from None
    if stat.S_ISDIR(st.st_mode):
        raise CaptureError(f"{name}: is a directory, not a sound file")
    if not stat.S_ISREG(st.st_mode):
        raise CaptureError(f"{name}: not a regular file (device, pipe or socket); give a WAV or FLAC file")
    if st.st_size == 0:
        raise CaptureError(f"{name}: the file is empty (0 bytes)")
    try:
        with open(path, "rb") as fh:
            return fh.read(512)
    except PermissionError:
        raise CaptureError(f"{name}: permission denied (the file is not readable)") from None
    except OSError as exc:
        raise CaptureError(f"{name}: cannot read the file ({exc.strerror or exc})") from None


def _open_error(name: str, head: bytes, exc: Exception) -> CaptureError:
    detail = str(getattr(exc, "error_string", "") or exc).strip().rstrip(".")
    if head[:4] in (b"RIFF", b"RIFX", b"RF64") or head[:4] == b"fLaC" or head[:4] == b"FORM":
        kind = {b"fLaC": "FLAC", b"FORM": "AIFF"}.get(head[:4], "WAV")
        return CaptureError(f"{name}: the {kind} header is damaged or truncated ({detail})")
    if _looks_like_text(head):
        return CaptureError(f"{name}: this is a text file, not a sound file (expected WAV or FLAC)")
    return CaptureError(f"{name}: not a sound file format that can be read ({detail}); expected WAV or FLAC")


def read_capture(path: str | os.PathLike[str]) -> Capture:
    """Read a sound file into a :class:`Capture`.

    Parameters
    ----------
    path : str or path-like
        WAV (8/16/24/32-bit integer, 32/64-bit float), FLAC (8/16/24-bit) or another
        uncompressed container libsndfile reads (AIFF, CAF, Wave64, RF64). Any number of
        channels; sample rate 8-192 kHz.

    Returns
    -------
    Capture
        Samples as float64, full scale 1.0, with ``full_scale_lsb`` set from the sample format
        (2**-15 for 16-bit, 0.0 for float) and ``sample_format`` such as ``"24-bit PCM WAV"``.

    Raises
    ------
    CaptureError
        One line naming the file and the fault: missing, a directory or other non-file,
        unreadable, empty, not a sound file (text, unknown bytes), damaged header, lossy or
        companded encoding, no frames, sample rate out of range, too long, or NaN/infinite
        samples.

    Notes
    -----
    The file is opened read-only and never changed. libsndfile decides the format from the
    file's contents, not its name.

    Examples
    --------
    >>> import numpy as np, tempfile, os
    >>> p = os.path.join(tempfile.mkdtemp(), "tone.wav")
    >>> t = np.arange(4800) / 48000
    >>> write_capture(p, 0.5 * np.sin(2 * np.pi * 1000 * t), 48000, "PCM_24")
    >>> cap = read_capture(p)
    >>> cap.sample_format, cap.rate_hz, round(float(cap.samples.max()), 4)
    ('24-bit PCM WAV', 48000.0, 0.5)
    """
    path = Path(path)
    name = str(path)
    head = _check_path(path)
    sf = _soundfile()
    try:
        handle = sf.SoundFile(name, mode="r")
    except sf.LibsndfileError as exc:
        raise _open_error(name, head, exc) from None
    except (RuntimeError, OSError, ValueError, TypeError) as exc:
        raise _open_error(name, head, exc) from None

    with handle:
        container, subtype = handle.format, handle.subtype
        described = describe_format(container, subtype)
        if subtype not in _SUBTYPES:
            raise CaptureError(
                f"{name}: {handle.subtype_info or subtype} ({subtype}) is a lossy or companded encoding "
                "that would spoil the measurement; record as PCM or float WAV, or FLAC"
            )
        rate = handle.samplerate
        if not (MIN_RATE_HZ <= rate <= MAX_RATE_HZ):
            raise CaptureError(
                f"{name}: sample rate {rate} Hz is outside the supported {MIN_RATE_HZ}-{MAX_RATE_HZ} Hz"
            )
        channels = handle.channels
        if channels < 1:
            raise CaptureError(f"{name}: the header declares {channels} channels")
        declared = handle.frames
        if declared <= 0:
            raise CaptureError(f"{name}: valid {described} header, but the file holds no audio frames")
        if declared * channels > MAX_SAMPLES:
            raise CaptureError(
                f"{name}: {declared} frames x {channels} channels is longer than the "
                f"{MAX_SAMPLES} samples this tool reads; trim the capture"
            )
        # Read in blocks until the data ends: a header that over-states the length costs nothing.
        blocks = []
        try:
            while True:
                block = handle.read(_READ_BLOCK_FRAMES, dtype="float64", always_2d=True)
                if block.shape[0] == 0:
                    break
                blocks.append(block)
                if block.shape[0] < _READ_BLOCK_FRAMES:
                    break
        except (sf.LibsndfileError, RuntimeError) as exc:
            detail = str(getattr(exc, "error_string", "") or exc).strip().rstrip(".")
            raise CaptureError(f"{name}: the audio data is damaged ({detail})") from None

    if not blocks:
        raise CaptureError(f"{name}: valid {described} header, but the file holds no audio frames")
    samples = blocks[0] if len(blocks) == 1 else np.concatenate(blocks, axis=0)
    return Capture(
        samples=samples,
        rate_hz=float(rate),
        source=name,
        sample_format=described,
        full_scale_lsb=_SUBTYPES[subtype][1],
    )


def _quantize(samples: np.ndarray, subtype: str) -> np.ndarray:
    """Float samples -> integers laid out as libsndfile expects them for ``subtype``.

    libsndfile takes the top bits of the integer type it is handed: 8-bit data is passed as
    int16 and 24-bit data as int32, shifted up accordingly.
    """
    bits = _SUBTYPES[subtype][0]
    scale = 2.0 ** (bits - 1)
    q = np.clip(np.rint(samples * scale), -scale, scale - 1)
    if bits == 8:
        return (q.astype(np.int16) << 8).astype(np.int16)
    if bits == 16:
        return q.astype(np.int16)
    if bits == 24:
        return q.astype(np.int32) << 8
    return q.astype(np.int64).astype(np.int32)


def write_capture(
    path: str | os.PathLike[str],
    samples: np.ndarray,
    rate_hz: float,
    subtype: str = "PCM_24",
) -> None:
    """Write samples (full scale 1.0) to a sound file.

    Parameters
    ----------
    path : str or path-like
        Destination; its extension chooses the container (``.wav``, ``.flac``, ``.aiff``...).
        Written to a temporary file beside it and renamed into place, so a failed write never
        leaves a half file.
    samples : array_like
        Shape (frames,) or (frames, channels), float, full scale 1.0. Integer formats saturate
        at full scale; float formats keep values beyond it.
    rate_hz : float
        Sample rate, a whole number of Hz in 8000-192000.
    subtype : str
        ``"PCM_16"``, ``"PCM_24"``, ``"PCM_32"``, ``"FLOAT"``, ``"DOUBLE"``, ``"PCM_U8"`` (8-bit
        WAV) or ``"PCM_S8"`` (8-bit FLAC), as the container allows.

    Raises
    ------
    CaptureError
        For an unknown extension or subtype, a subtype the container cannot hold, a rate out of
        range, empty or non-finite samples, or a failed write.
    """
    path = Path(path)
    name = str(path)
    sf = _soundfile()
    container = path.suffix.lower().lstrip(".")
    container = {"wave": "wav", "aif": "aiff"}.get(container, container).upper()
    if container not in sf.available_formats():
        raise CaptureError(
            f"{name}: unknown sound file extension '{path.suffix}'; use .wav or .flac"
        )
    subtype = str(subtype).upper()
    if subtype not in _SUBTYPES:
        raise CaptureError(f"subtype {subtype!r} is not supported; allowed: {', '.join(_SUBTYPES)}")
    if not sf.check_format(container, subtype):
        allowed = [s for s in _SUBTYPES if sf.check_format(container, s)]
        raise CaptureError(
            f"{name}: a {container} file cannot hold {subtype}; allowed: {', '.join(allowed)}"
        )
    rate = float(rate_hz)
    if not (MIN_RATE_HZ <= rate <= MAX_RATE_HZ) or rate != int(rate):
        raise CaptureError(
            f"rate_hz {rate_hz!r} must be a whole number of Hz in {MIN_RATE_HZ}-{MAX_RATE_HZ}"
        )
    data = np.asarray(samples, dtype=np.float64)
    if data.ndim == 1:
        data = data[:, None]
    if data.ndim != 2 or data.shape[0] == 0 or data.shape[1] == 0:
        raise CaptureError(f"{name}: samples must be a non-empty (frames, channels) array, got shape {data.shape}")
    if not np.all(np.isfinite(data)):
        raise CaptureError(f"{name}: refusing to write NaN or infinite samples")

    payload = data if _SUBTYPES[subtype][1] == 0.0 else _quantize(data, subtype)
    directory = path.parent if str(path.parent) else Path(".")
    # A fresh name beside the destination; opened with "x" so the umask sets its permissions.
    tmp = directory / f".{path.name}.{os.getpid()}.{secrets.token_hex(4)}.part"
    try:
        with open(tmp, "x+b") as fh:
            sf.write(fh, payload, int(rate), subtype=subtype, format=container)
        os.replace(tmp, path)
    except (sf.LibsndfileError, RuntimeError, OSError) as exc:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        detail = getattr(exc, "error_string", None) or getattr(exc, "strerror", None) or exc
        raise CaptureError(f"{name}: writing failed ({detail})") from None
