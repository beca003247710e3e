"""A capture: multichannel samples at a known rate, and the one-dimensional view a measurement reads.

Samples are float64 scaled so that digital full scale is 1.0 (0 dBFS is a sine of peak 1.0).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from rtanalyzer.dsp.clipping import clipped_channels
from rtanalyzer.errors import CaptureError

MIN_RATE_HZ = 8_000
MAX_RATE_HZ = 192_000


@dataclass(frozen=True)
class Signal:
    """What a measurement analyses: one real channel, or I/Q combined as I + jQ.

    Attributes
    ----------
    samples : ndarray
        1-D float64 (real capture) or complex128 (I/Q capture), full scale 1.0.
    rate_hz : float
        Sample rate in Hz.
    clipped : bool
        True when any channel that went into ``samples`` touched full scale.
    label : str
        Human description of the view, e.g. ``"channel 2"`` or ``"I/Q (1=I, 2=Q)"``.
    """

    samples: np.ndarray
    rate_hz: float
    clipped: bool = False
    label: str = "channel 1"
    source: str = ""  # the file or device it came from, for messages

    @property
    def where(self) -> str:
        """Source and view, for one-line messages: ``"take3.wav, channel 2"``."""
        return f"{self.source}, {self.label}" if self.source else self.label

    @property
    def is_complex(self) -> bool:
        return np.iscomplexobj(self.samples)

    @property
    def seconds(self) -> float:
        return len(self.samples) / self.rate_hz


@dataclass(frozen=True)
class Capture:
    """Samples of shape (frames, channels), float64, full scale 1.0.

    ``full_scale_lsb`` is the size of one quantization step of the source format relative to
    full scale (2**-15 for 16-bit), or 0.0 for floating-point data; clipping detection uses it.
    """

    samples: np.ndarray
    rate_hz: float
    source: str = "memory"
    sample_format: str = "float"
    full_scale_lsb: float = 0.0
    clipped: tuple[bool, ...] = field(default=())

    def __post_init__(self) -> None:
        data = np.asarray(self.samples, dtype=np.float64)
        if data.ndim == 1:
            data = data[:, None]
        if data.ndim != 2 or data.shape[1] < 1:
            raise CaptureError(f"{self.source}: samples must be (frames, channels), got shape {data.shape}")
        if data.shape[0] == 0:
            raise CaptureError(f"{self.source}: the capture holds no samples")
        if not (MIN_RATE_HZ <= self.rate_hz <= MAX_RATE_HZ):
            raise CaptureError(
                f"{self.source}: sample rate {self.rate_hz:g} Hz is outside the supported "
                f"{MIN_RATE_HZ}-{MAX_RATE_HZ} Hz"
            )
        if not np.all(np.isfinite(data)):
            bad = int(np.count_nonzero(~np.isfinite(data)))
            raise CaptureError(
                f"{self.source}: {bad} sample{'s are' if bad != 1 else ' is'} NaN or infinite; the capture is unusable"
            )
        object.__setattr__(self, "samples", data)
        if not self.clipped:
            object.__setattr__(self, "clipped", clipped_channels(data, self.full_scale_lsb))

    @property
    def channels(self) -> int:
        return self.samples.shape[1]

    @property
    def frames(self) -> int:
        return self.samples.shape[0]

    def view(self, channel: int | None = None, iq: bool = False) -> Signal:
        """Select what a measurement reads.

        Parameters
        ----------
        channel : int, optional
            1-based channel number (1 = left, 2 = right). Default 1.
        iq : bool
            Combine channel 1 (I) and channel 2 (Q) into I + jQ.

        Raises
        ------
        CaptureError
            When the channel does not exist, or I/Q is asked of a capture with fewer than two
            channels, or both ``channel`` and ``iq`` are given.
        """
        if iq:
            if channel is not None:
                raise CaptureError("choose either --channel or --iq, not both")
            if self.channels < 2:
                raise CaptureError(
                    f"{self.source}: --iq needs a stereo capture (I left, Q right); this one has "
                    f"{self.channels} channel"
                )
            # (frames, 2) float64 in C order is already I, Q interleaved: view it as complex.
            z = np.ascontiguousarray(self.samples[:, :2]).view(np.complex128)[:, 0]
            return Signal(z, self.rate_hz, bool(self.clipped[0] or self.clipped[1]), "I/Q (1=I, 2=Q)", self.source)
        number = 1 if channel is None else int(channel)
        if not 1 <= number <= self.channels:
            raise CaptureError(
                f"{self.source}: channel {number} does not exist; this capture has channels "
                f"1..{self.channels} (1 = left, 2 = right)"
            )
        return Signal(
            np.ascontiguousarray(self.samples[:, number - 1]),
            self.rate_hz,
            bool(self.clipped[number - 1]),
            f"channel {number}",
            self.source,
        )
