"""What the band view shows for each measurement it follows: the words, the figures, the plots.

Two measurements have points across the audio band:

- ``quadrature`` (the 90° network alone, left = I, right = Q): phase error, amplitude ratio and
  the suppression those two errors alone allow, keyed by ``frequency_hz``. Where both errors are
  within their noise (``predicted_suppression_is_bound``) the suppression is a lower bound:
  "≥ X dB", a hollow triangle;
- ``sideband`` (the whole exciter through the receiver): the measured opposite-sideband
  suppression and the wanted level, keyed by ``tone_hz``. Where the unwanted sideband is
  under the noise the suppression is a lower bound: it is written "≥ X dB" and drawn as a
  hollow upward triangle, never as a plain number.

A :class:`BandMode` turns a point into the texts of the view; :mod:`rtanalyzer.gui.band_view`
owns the window and the state.
"""

from __future__ import annotations

import math
from typing import Any, Sequence

import numpy as np

from rtanalyzer.gui.band_plot import PlotSpec
from rtanalyzer.gui.plots import MINUS

AT_LEAST = "\u2265 "


def _down(value: float) -> float:
    """A lower bound to one decimal, rounded down so that it stays one."""
    return math.floor(value * 10.0) / 10.0


def us_of(phase_deg: float, frequency_hz: float) -> float:
    """A phase at ``frequency_hz`` as a time: φ/(360·f), in microseconds."""
    return phase_deg / (360.0 * frequency_hz) * 1e6


def _signed(value: float, decimals: int) -> str:
    return f"{value:+.{decimals}f}".replace("-", MINUS)


def _plain(value: float, decimals: int) -> str:
    return f"{value:.{decimals}f}".replace("-", MINUS)


def _plural(n: int, word: str) -> str:
    return f"{n} {word}{'s' if n != 1 else ''}"


class BandMode:
    """The texts and plots of one measurement in the band view (subclasses fill them in)."""

    measurement = ""
    window_title = ""
    tone_title = ""  # the top-left tile
    units = ("", "")  # of its two large figures
    waiting = ""
    advice_title = ""
    fkey = "frequency_hz"  # each point's frequency
    plots: tuple[PlotSpec, ...] = ()

    def points_of(self, result: dict[str, Any]) -> list[dict[str, Any]]:
        return [p for p in (result.get("points") or []) if p.get(self.fkey)]

    def score(self, p: dict[str, Any]) -> float | None:
        """The figure the worst point is the lowest of (None: the point has none)."""
        raise NotImplementedError

    def is_bound(self, p: dict[str, Any]) -> bool:
        """Is the point's score only a lower bound?"""
        return False

    def strength(self, p: dict[str, Any]) -> float:
        """How strong the point's tone is (the strongest is shown when no tone is chosen)."""
        raise NotImplementedError

    def worst_text(self, w: dict[str, Any]) -> str:
        if self.is_bound(w):
            return f"worst {AT_LEAST}{_down(self.score(w)):.1f} dB at {w[self.fkey]:.0f} Hz"
        return f"worst {self.score(w):.1f} dB at {w[self.fkey]:.0f} Hz"

    def worst_detail(self, w: dict[str, Any], inside: Sequence[dict[str, Any]], band: tuple[float, float]) -> str:
        raise NotImplementedError

    def figures(self, p: dict[str, Any]) -> tuple[str, str, str]:
        """The two large figures of the tone shown and the line under them."""
        raise NotImplementedError

    def advice(self, inside: list[dict[str, Any]], band: tuple[float, float], network=None) -> list[str]:
        """Advice for the points in the band; ``network`` (a design) lets the diagnosis know its ripple."""
        raise NotImplementedError


class NetworkMode(BandMode):
    """The 90° network measured alone (``quadrature``)."""

    measurement = "quadrature"
    window_title = "90° network band"
    tone_title = "Phase difference I − Q"
    units = ("°", "µs")
    waiting = "waiting for the network's outputs"
    advice_title = "Which way to turn (points in the band)"
    fkey = "frequency_hz"
    #: Added to each point for the plot: False where the suppression is only a lower bound
    #: (``PlotSpec.bound_key`` reads False as a bound; the result itself says it the other way
    #: round, ``predicted_suppression_is_bound``).
    MEASURED_KEY = "predicted_suppression_measured"
    plots = (
        PlotSpec("Phase error", "degrees", "phase_error_deg", 0.5),
        PlotSpec("Amplitude ratio Q/I", "dB", "amplitude_ratio_db", 0.2),
        PlotSpec("Predicted suppression", "dB", "predicted_suppression_db", 5.0, bound_key=MEASURED_KEY,
                 legend="hollow triangle: at least (errors within the noise) · ringed: worst in band"),
    )

    def points_of(self, result):
        return [{**p, self.MEASURED_KEY: not p.get("predicted_suppression_is_bound", False)}
                for p in super().points_of(result)]

    def score(self, p):
        return p.get("predicted_suppression_db")

    def is_bound(self, p):
        return p.get("predicted_suppression_db") is not None and p.get("predicted_suppression_is_bound") is True

    def strength(self, p):
        return p.get("left_dbfs", -999.0) + p.get("right_dbfs", -999.0)

    def worst_detail(self, w, inside, band):
        lo, hi = band
        err, f = w["phase_error_deg"], w["frequency_hz"]
        if self.is_bound(w):
            there = "phase error and ratio within their noise: a lower bound"
        else:
            there = (f"phase error {_signed(err, 2)}° ({_signed(us_of(err, f), 2)} µs), ratio "
                     f"{_signed(w['amplitude_ratio_db'], 2)} dB")
        return f"{_plural(len(inside), 'point')} in {lo:g}–{hi:g} Hz · there: {there}"

    def figures(self, p):
        f, deg, err = p["frequency_hz"], p["phase_difference_deg"], p["phase_error_deg"]
        s = p["predicted_suppression_db"]
        suppression = (f"suppression {AT_LEAST}{_down(s):.1f} dB (limited by noise)" if self.is_bound(p)
                       else f"suppression {s:.1f} dB")
        detail = (f"at {f:.1f} Hz · error {_signed(err, 2)}° = {_signed(us_of(err, f), 2)} µs · ratio "
                  f"{_signed(p['amplitude_ratio_db'], 2)} dB · {suppression}")
        return _plain(deg, 2), _plain(us_of(deg, f), 1), detail

    def advice(self, inside, band, network=None):
        from rtanalyzer.errors import RtaError
        from rtanalyzer.measurements.diagnosis import diagnose_quadrature

        try:
            d = diagnose_quadrature(inside, network, band)
        except (RtaError, ValueError, np.linalg.LinAlgError) as exc:
            return [f"no advice yet: {exc}"]
        lines = list(d.get("advice") or [])
        after = d["after_trims_worst_predicted_suppression_db"]
        after = f"at least {_down(after):.1f}" if d.get("after_trims_worst_is_lower_bound") else f"{after:.1f}"
        if d.get("limited_now_by"):
            lines.insert(0, f"limited now by {d['limited_now_by']}; after both trims the worst would be {after} dB")
        elif d.get("summary"):
            lines.insert(0, d["summary"])
        return lines


class ExciterMode(BandMode):
    """The whole exciter through the receiver (``sideband``): measured suppression per tone."""

    measurement = "sideband"
    window_title = "exciter suppression across the band"
    tone_title = "Suppression of the tone shown"
    units = ("dB", "dBFS wanted")
    waiting = "waiting for the exciter's sidebands"
    advice_title = "What the suppression says (points in the band)"
    fkey = "tone_hz"
    plots = (
        PlotSpec("Measured suppression", "dB", "sideband_suppression_db", 5.0, bound_key="unwanted_detected",
                 legend="hollow triangle: at least · ringed: worst in band"),
        PlotSpec("Wanted level", "dBFS", "wanted_dbfs", 1.0),
    )

    def score(self, p):
        return p.get("sideband_suppression_db")

    def is_bound(self, p):
        return p.get("sideband_suppression_db") is not None and p.get("unwanted_detected") is False

    def strength(self, p):
        level = p.get("wanted_dbfs")
        return -999.0 if level is None else level

    def worst_detail(self, w, inside, band):
        lo, hi = band
        if self.is_bound(w):
            there = f"the unwanted sideband at {w['unwanted_hz']:.1f} Hz is under the noise: a lower bound"
        else:
            there = f"wanted {_plain(w['wanted_dbfs'], 1)} dBFS, unwanted {_plain(w['unwanted_dbfs'], 1)} dBFS"
        levels = [p["wanted_dbfs"] for p in inside if p.get("wanted_dbfs") is not None]
        flat = f" · wanted level spans {max(levels) - min(levels):.2f} dB" if len(levels) > 1 else ""
        return f"{_plural(len(inside), 'point')} in {lo:g}–{hi:g} Hz · there: {there}{flat}"

    def figures(self, p):
        tone = p["tone_hz"]
        s, wanted = p.get("sideband_suppression_db"), p.get("wanted_dbfs")
        if s is None or wanted is None:
            return "—", "—", (f"tone {tone:g} Hz · the wanted sideband at {p['wanted_hz']:.1f} Hz is not above "
                              "the noise: no suppression figure")
        if self.is_bound(p):
            unwanted = f"unwanted at {p['unwanted_hz']:.1f} Hz under the noise: the suppression is at least this"
        else:
            unwanted = f"unwanted at {p['unwanted_hz']:.1f} Hz, {_plain(p['unwanted_dbfs'], 1)} dBFS"
        bound = AT_LEAST if self.is_bound(p) else ""
        return (f"{bound}{s:.1f}", _plain(wanted, 1),
                f"tone {tone:g} Hz · wanted at {p['wanted_hz']:.1f} Hz · {unwanted}")

    def advice(self, inside, band, network=None):
        from rtanalyzer.errors import RtaError
        from rtanalyzer.measurements.diagnosis import diagnose_sideband

        try:
            d = diagnose_sideband(inside, network, band)
        except (RtaError, ValueError, np.linalg.LinAlgError) as exc:
            return [f"no advice yet: {exc}"]
        lines = list(d.get("advice") or [])
        if d.get("worst_is_lower_bound"):
            lines.insert(0, "the worst point is a lower bound (its unwanted sideband is under the noise): "
                            "the error is at most what follows")
        return lines


MODES: dict[str, BandMode] = {m.measurement: m for m in (NetworkMode(), ExciterMode())}
