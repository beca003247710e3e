"""Clipping detection on full-scale-normalised samples.

A channel counts as clipped when two or more consecutive samples sit within one quantization
step of full scale, or when any floating-point sample lies beyond full scale. Counting runs of
consecutive full-scale samples, rather than single touches, is how digital peak meters flag an
"over" (common practice, no source); a clean sine whose peak is just below full scale never
produces such a run at audio frequencies.
"""

from __future__ import annotations

import numpy as np

def clip_threshold(full_scale_lsb: float) -> float:
    """Magnitude at or above which a sample counts as at full scale."""
    if full_scale_lsb > 0.0:
        return 1.0 - 1.5 * full_scale_lsb
    return 1.0 - 1e-6


def last_clip_run(column: np.ndarray, full_scale_lsb: float = 0.0) -> int:
    """Index of the last sample of the last clip (a run of two at full scale, or a float sample
    beyond it) in a 1-D block, or -1 when the block holds none."""
    mag = np.abs(np.asarray(column, dtype=np.float64))
    beyond = np.flatnonzero(mag > 1.0)
    hot = mag >= clip_threshold(full_scale_lsb)
    runs = np.flatnonzero(hot[1:] & hot[:-1]) + 1
    last = max(beyond[-1] if beyond.size else -1, runs[-1] if runs.size else -1)
    return int(last)


def clipped_channels(samples: np.ndarray, full_scale_lsb: float = 0.0) -> tuple[bool, ...]:
    """Per-channel clip flags for ``samples`` of shape (frames, channels).

    Parameters
    ----------
    samples : ndarray
        Float samples, full scale 1.0.
    full_scale_lsb : float
        One quantization step relative to full scale (2**-15 for 16-bit), 0 for float data.

    Returns
    -------
    tuple of bool
        One flag per channel.
    """
    data = np.asarray(samples, dtype=np.float64)
    if data.ndim == 1:
        data = data[:, None]
    limit = clip_threshold(full_scale_lsb)
    flags = []
    for column in data.T:
        column = np.ascontiguousarray(column)  # strided reductions are ten times slower
        peak = max(float(column.max()), -float(column.min()))
        if peak < limit:
            flags.append(False)  # the common case, decided without a temporary array
            continue
        if peak > 1.0:
            flags.append(True)
            continue
        hot = np.abs(column) >= limit
        flags.append(bool(np.any(hot[1:] & hot[:-1])))
    return tuple(flags)
