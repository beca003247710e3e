"""A compact, refreshing readout in the terminal (a plain line per second when not a terminal)."""

from __future__ import annotations

from typing import TextIO

from rtanalyzer.live.engine import Readout

ARROWS = {"better": "up, better", "worse": "down, worse", "steady": "steady"}


def _db(value, unit="dB", bound=""):
    return "—" if value is None else f"{bound}{value:.1f} {unit}"


def figure_lines(measure: str, r: dict) -> list[str]:
    """The figures a builder trims by, with bounds said as bounds."""
    if measure == "twotone":
        lines = [f"tones        {r['tone_hz'][0]:.1f} Hz {r['tone_dbfs'][0]:.1f} dBFS, "
                 f"{r['tone_hz'][1]:.1f} Hz {r['tone_dbfs'][1]:.1f} dBFS   PEP {r['pep_dbfs']:.1f} dBFS"]
        for o in r["imd"]:
            worst = o["worst_db_pep"]
            text = "out of range" if worst is None else _db(worst, "dB PEP", "below " if o["worst_is_bound"] else "")
            lines.append(f"IMD{o['order']}         {text}")
        return lines
    if measure == "quadrature":
        return _quadrature_lines(r)
    worst = r["worst_sideband_suppression_db"]
    lines = [
        "opposite sideband  " + _db(worst, "dB", "at least " if r["worst_is_lower_bound"] else "")
        + (f"   (worst of {len(r['points'])} tones)" if len(r["points"]) > 1 else ""),
        "carrier            " + _db(r["carrier_suppression_db"], "dBc", "" if r["carrier_detected"] else "at least "),
    ]
    return lines


def _quadrature_lines(r: dict) -> list[str]:
    """The 90° network: the strongest tone's phase in degrees and µs side by side, then the band."""
    points = r.get("points") or []
    if not points:
        return ["no tone above the noise on both inputs"]
    top = max(points, key=lambda p: p["left_dbfs"] + p["right_dbfs"])
    f = top["frequency_hz"]
    err_us = top["phase_error_deg"] / (360.0 * f) * 1e6
    lines = [
        f"phase I-Q    {top['phase_difference_deg']:.2f}° = {top['time_offset_us']:.1f} µs at {f:.1f} Hz"
        f"   error {top['phase_error_deg']:+.2f}° ({err_us:+.2f} µs)",
        f"ratio Q/I    {top['amplitude_ratio_db']:+.3f} dB   predicted suppression "
        f"{'≥ ' if top.get('predicted_suppression_is_bound') else ''}{top['predicted_suppression_db']:.1f} dB",
    ]
    band = r.get("band") or {}
    if len(points) > 1 and band.get("worst_predicted_suppression_db") is not None:
        bound = "≥ " if band.get("worst_is_lower_bound") else ""
        lines.append(f"band {band['low_hz']:g}-{band['high_hz']:g} Hz  worst {bound}{band['worst_predicted_suppression_db']:.1f} dB "
                     f"at {band['worst_frequency_hz']:.0f} Hz ({band['points']} tones)")
    return lines


class TerminalDisplay:
    def __init__(self, stream: TextIO, source: str, measure: str) -> None:
        self.stream = stream
        self.source = source
        self.measure = measure
        self.tty = stream.isatty()
        self._drawn = 0
        self._last_plain = None
        self._held: Readout | None = None  # plain output: the readout the next line is made of

    def lines(self, readout: Readout) -> list[str]:
        head = f"rtanalyzer live · {self.source} · {self.measure} · {readout.state}"
        body = self._figures(readout)
        if readout.best and readout.best.get("best") is not None:
            b = readout.best
            unit = "dB PEP" if self.measure == "twotone" else "dB"
            body.append(f"best so far        {b['best']:.1f} {unit}   last change: {ARROWS[b['trend']]}")
        lv = readout.levels
        meters = "  ".join(
            f"ch{i + 1} peak {_db(p, 'dBFS')} rms {_db(q, 'dBFS')}{' CLIP' if c else ''}"
            for i, (p, q, c) in enumerate(zip(lv["peak_dbfs"], lv["rms_dbfs"], lv["clip"]))
        )
        x = readout.xruns
        body.append(f"levels   {meters}")
        body.append(f"xruns    in {x['input_overflows']}  out {x['output_underflows']}  dropped {x['dropped_blocks']}")
        if readout.result and readout.result.get("warnings"):
            body += [f"warning: {w}" for w in readout.result["warnings"][:2]]
        return [head, *body]

    def _figures(self, readout: Readout) -> list[str]:
        lines = figure_lines(self.measure, readout.result) if readout.result else [f"({readout.error})"]
        sweep = readout.sweep
        if sweep is not None:  # say which step a figure belongs to
            lines.insert(0, f"sweep step {sweep['step'] + 1} at {sweep['frequency_hz']:.0f} Hz"
                            + ("" if readout.result else ", settling"))
        return lines

    def show(self, readout: Readout) -> None:
        lines = self.lines(readout)
        if self.tty:
            # Move up over the last drawing and overwrite it line by line.
            up = f"\x1b[{self._drawn}F" if self._drawn else ""
            self.stream.write(up + "".join(f"\x1b[2K{line}\n" for line in lines))
            for _ in range(self._drawn - len(lines)):
                self.stream.write("\x1b[2K\n")
            self._drawn = max(len(lines), self._drawn)
        else:
            # One line a second, from the newest readout with figures in it (a sweep's settling
            # readouts would otherwise hide every figure).
            if readout.result is not None or self._held is None:
                self._held = readout
            second = int(readout.t)
            if second == self._last_plain:
                return
            self._last_plain = second
            shown, self._held = self._held, None
            levels = next(line for line in self.lines(shown) if line.startswith("levels"))
            self.stream.write(" | ".join([*self._figures(shown), levels]) + "\n")
        self.stream.flush()

    def close(self) -> None:
        self.stream.flush()
