"""Sound devices through sounddevice/PortAudio: import on demand, list, find by name, check settings.

Every failure is one :class:`SoundCardError` line; a device that cannot be found or told apart
lists the candidates with their indices, as sounddevice itself does for an ambiguous name.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from rtanalyzer.errors import RtaError

ALLOWED_RATES_HZ = (44100, 48000, 96000, 192000)
MISSING_PORTAUDIO = "PortAudio is missing: apt-get install libportaudio2 (and pip install sounddevice)"


class SoundCardError(RtaError):
    """A sound card that cannot be used as asked: PortAudio missing, no such device, bad setting."""


def load_sounddevice():
    """Import sounddevice, or raise the one-line error saying what to install."""
    try:
        import sounddevice
    except (ImportError, OSError):  # OSError: the module loads but finds no PortAudio library
        raise SoundCardError(MISSING_PORTAUDIO) from None
    return sounddevice


def one_line(exc: BaseException) -> str:
    """An exception as one line, for messages made of PortAudio's own text."""
    return " ".join(str(exc).split()).rstrip(".") or type(exc).__name__


def list_devices() -> list[dict[str, Any]]:
    """Every PortAudio device with its host API, channel counts, default rate and default marks.

    Returns
    -------
    list of dict
        Keys ``index``, ``name``, ``hostapi``, ``max_input_channels``, ``max_output_channels``,
        ``default_samplerate_hz``, ``default_input``, ``default_output``.

    Raises
    ------
    SoundCardError
        PortAudio is missing or cannot list its devices.
    """
    sd = load_sounddevice()
    devices = _query(sd)
    default_in, default_out = _defaults(sd)
    listing = []
    for d in devices:
        try:
            hostapi = str(sd.query_hostapis(d["hostapi"])["name"])
        except Exception:  # a host API PortAudio cannot describe: still list the device
            hostapi = "?"
        listing.append({
            "index": int(d["index"]),
            "name": str(d["name"]),
            "hostapi": hostapi,
            "max_input_channels": int(d["max_input_channels"]),
            "max_output_channels": int(d["max_output_channels"]),
            "default_samplerate_hz": float(d["default_samplerate"]),
            "default_input": d["index"] == default_in,
            "default_output": d["index"] == default_out,
        })
    return listing


def _query(sd) -> list[dict]:
    try:
        return [dict(d) for d in sd.query_devices()]
    except Exception as exc:  # PortAudioError, or a broken host API
        raise SoundCardError(f"cannot list the sound devices: {one_line(exc)}") from None


def _defaults(sd) -> tuple[int, int]:
    try:
        pair = sd.default.device
        return int(pair[0]), int(pair[1])
    except Exception:  # no defaults configured
        return -1, -1


def _channel_key(kind: str) -> str:
    return "max_input_channels" if kind == "input" else "max_output_channels"


def _candidates(devices: list[dict], kind: str) -> str:
    key = _channel_key(kind)
    found = [f"{d['index']} '{d['name']}'" for d in devices if d[key] > 0]
    return ", ".join(found) if found else "none (no sound card or sound server?)"


def find_device(sd, spec: int | str | None, kind: str) -> dict:
    """The device ``spec`` names for ``kind`` ("input" or "output").

    Parameters
    ----------
    sd : module
        sounddevice (or a stand-in offering ``query_devices`` and ``default``).
    spec : int, str or None
        An index, a part of a name (case-insensitive; an exact name wins), or None for the
        default device.

    Returns
    -------
    dict
        The device's description from ``sd.query_devices``.

    Raises
    ------
    SoundCardError
        No such device (the line lists the ``kind`` devices with their indices), or a name that
        matches several (the line lists those).
    """
    devices = _query(sd)
    key = _channel_key(kind)
    if spec is None:
        index = _defaults(sd)[0 if kind == "input" else 1]
        if not 0 <= index < len(devices) or devices[index][key] < 1:
            raise SoundCardError(f"there is no default {kind} device; {kind} devices: {_candidates(devices, kind)}")
        return devices[index]
    if isinstance(spec, (int, np.integer)) or str(spec).strip().isdigit():
        index = int(spec)
        if not 0 <= index < len(devices) or devices[index][key] < 1:
            raise SoundCardError(f"there is no {kind} device {index}; {kind} devices: {_candidates(devices, kind)}")
        return devices[index]
    text = str(spec).strip().lower()
    matches = [d for d in devices if d[key] > 0 and text in str(d["name"]).lower()]
    exact = [d for d in matches if str(d["name"]).lower() == text]
    if len(exact) == 1 or len(matches) == 1:
        return (exact or matches)[0]
    if not matches:
        raise SoundCardError(f"no {kind} device matches '{spec}'; {kind} devices: {_candidates(devices, kind)}")
    raise SoundCardError(
        f"{kind} device name '{spec}' is ambiguous: it matches {_candidates(matches, kind)}; "
        "give the index or more of the name"
    )


def check_device(sd, device: dict, kind: str, channels: int, rate_hz: int) -> None:
    """Raise a one-line SoundCardError unless ``device`` takes ``channels`` at ``rate_hz``."""
    check = sd.check_input_settings if kind == "input" else sd.check_output_settings

    def works(rate: int, count: int) -> bool:
        try:
            check(device=device["index"], channels=count, samplerate=rate, dtype="float32")
        except (sd.PortAudioError, ValueError):
            return False
        return True

    if works(rate_hz, channels):
        return
    most = int(device[_channel_key(kind)])
    rates = [r for r in ALLOWED_RATES_HZ if most > 0 and works(r, min(channels, most))]
    allowed = ", ".join(map(str, ALLOWED_RATES_HZ))
    offers = f"{', '.join(map(str, rates))} Hz" if rates else f"none of the rates {allowed} Hz"
    verb = "record" if kind == "input" else "play"
    raise SoundCardError(
        f"device '{device['name']}' cannot {verb} {channels} channel{'s' if channels > 1 else ''} at "
        f"{rate_hz} Hz; it offers up to {most} {kind} channel{'s' if most != 1 else ''} at {offers}"
    )
