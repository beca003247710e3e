"""Level meters and clip detection over every captured frame, with a hold on the clip light."""

from __future__ import annotations

import numpy as np

from rtanalyzer.dsp.clipping import clip_threshold, last_clip_run

# A clip stays shown this long after the last clipped sample, so a brief one is not missed.
CLIP_HOLD_S = 2.0


class Meters:
    """Peak and RMS (dBFS, AES17: a full-scale sine reads 0 dBFS) per channel, and clip hold.

    The clip light follows the rule of ``dsp.clipping`` (two samples in a row at full scale, or
    a float sample beyond it) and stays on for CLIP_HOLD_S after the clipped sample.

    ``update`` gets every new frame since the last call, so no clipped sample escapes even
    when readouts are slower than the audio blocks.
    """

    def __init__(self, channels: int, rate_hz: float, full_scale_lsb: float = 2.0**-15) -> None:
        self.channels = channels
        self.rate_hz = rate_hz
        self._lsb = full_scale_lsb
        self._limit = clip_threshold(full_scale_lsb)
        self.peak_dbfs = [-np.inf] * channels
        self.rms_dbfs = [-np.inf] * channels
        self.clip_count = [0] * channels
        self._frames = 0
        self._last_clip = [-np.inf] * channels

    def update(self, frames: np.ndarray) -> None:
        if len(frames) == 0:
            return
        for ch in range(self.channels):
            col = np.asarray(frames[:, ch], dtype=np.float64)
            peak = float(np.max(np.abs(col)))
            rms = float(np.sqrt(np.mean(col * col)))
            self.peak_dbfs[ch] = 20 * np.log10(peak) if peak > 0 else -np.inf
            # +3.01 dB: a sine's RMS is 1/sqrt(2) of its peak, and the meter reads in sine dBFS.
            self.rms_dbfs[ch] = 20 * np.log10(rms * np.sqrt(2)) if rms > 0 else -np.inf
            if peak >= self._limit:
                # Same rule as for recorded captures: a run at full scale, not a single touch.
                last = last_clip_run(col, self._lsb)
                if last >= 0:
                    self.clip_count[ch] += int(np.count_nonzero(np.abs(col) >= self._limit))
                    self._last_clip[ch] = self._frames + last + 1
        self._frames += len(frames)

    def clipping(self) -> list[bool]:
        """Clip light per channel: on from a clipped sample until CLIP_HOLD_S later."""
        hold = CLIP_HOLD_S * self.rate_hz
        return [self._frames - last <= hold for last in self._last_clip]

    def as_dict(self) -> dict:
        def db(v: float) -> float | None:
            return None if not np.isfinite(v) else round(float(v), 2)

        return {
            "peak_dbfs": [db(v) for v in self.peak_dbfs],
            "rms_dbfs": [db(v) for v in self.rms_dbfs],
            "clip": self.clipping(),
            "clipped_samples": list(self.clip_count),
        }
