"""Design check of an RC all-pass network pair from its component values.

A network file lists the sections of the two chains as a builder writes them down, one section
per line: the chain (``I`` or ``Q``), the resistor and the capacitor, with SI prefixes::

    # Bench example network: 4 + 4 sections, 10 nF throughout
    I 1.2k 10n
    I 7.5k 10n
    Q 3.9k 10n      # a comment may follow a section
    Q 220k 10n

Values take an SI prefix (p, n, u or µ, m, k, M, G), may put the prefix in place of the decimal
point (``4k7`` = 4.7 kΩ, ``4n7`` = 4.7 nF) and may end in a unit (``Ω``, ``ohm``, ``R``, ``F``).
``#`` starts a comment. The order of sections within a chain does not matter (each is a
first-order all-pass, and their phases add).

From it: the ideal phase difference across a band (first-order all-pass phase
-2·atan(ωRC) per section, ``dsp.allpass``), the opposite-sideband suppression it alone allows
(image-rejection relation with equal amplitudes), what remains after the best constant phase
trim, and a Monte-Carlo spread over component tolerances.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from rtanalyzer.dsp.allpass import Section, pair_difference_rad
from rtanalyzer.dsp.quadrature import image_rejection_db
from rtanalyzer.errors import PlanError

_PREFIX = {"p": 1e-12, "n": 1e-9, "u": 1e-6, "µ": 1e-6, "μ": 1e-6, "m": 1e-3, "k": 1e3, "K": 1e3, "M": 1e6, "G": 1e9}
_VALUE = re.compile(r"^(\d+(?:\.\d*)?|\.\d+)(?:([pnuµμmkKMG])(\d*))?(?:Ω|ohms?|R|F)?$")
#: Frequencies per band on which the phase is evaluated (log spaced).
GRID_POINTS = 241
DEFAULT_BAND_HZ = (300.0, 3000.0)


def parse_value(token: str, where: str = "") -> float:
    """A component value with an optional SI prefix: ``10k``, ``4k7``, ``4.7n``, ``220000``, ``1e-8``.

    Raises
    ------
    PlanError
        For a token that is not such a value, or a value that is not positive.

    Examples
    --------
    >>> parse_value("4k7"), parse_value("10n"), parse_value("1.2kΩ"), parse_value("2.2e-9")
    (4700.0, 1e-08, 1200.0, 2.2e-09)
    """
    text = token.strip()
    value = None
    try:
        value = float(text)
    except ValueError:
        m = _VALUE.match(text)
        if m:
            whole, prefix, decimals = m.groups()
            number = float(f"{whole}.{decimals}" if decimals and "." not in whole else whole)
            value = number * (_PREFIX[prefix] if prefix else 1.0)
    if value is None or not np.isfinite(value) or value <= 0:
        raise PlanError(f"{where}{token!r} is not a component value; write e.g. 10k, 4k7, 4.7n or 1e-8")
    return float(f"{value:.12g}")


@dataclass(frozen=True)
class Network:
    """The two chains of an RC all-pass network pair (ohms, farads)."""

    chain_i: tuple[Section, ...]
    chain_q: tuple[Section, ...]
    source: str = ""

    def difference_deg(self, frequency_hz) -> np.ndarray:
        """Phase by which the I output leads the Q output, degrees."""
        return np.degrees(pair_difference_rad(frequency_hz, self.chain_i, self.chain_q))

    def text(self) -> str:
        """The network in the file format."""
        lines = [f"{name} {_si(r, 'Ω')} {_si(c, 'F')}" for name, chain in (("I", self.chain_i), ("Q", self.chain_q))
                 for r, c in chain]
        return "\n".join(lines) + "\n"


def _si(value: float, unit: str) -> str:
    for prefix, scale in (("G", 1e9), ("M", 1e6), ("k", 1e3), ("", 1.0), ("m", 1e-3), ("u", 1e-6), ("n", 1e-9),
                          ("p", 1e-12)):
        if value >= scale * 0.999999:
            return f"{value / scale:.6g}{prefix}"
    return f"{value:.6g}"


def parse_network(text: str, where: str = "network") -> Network:
    """Read a network file's text (format in the module docstring).

    Raises
    ------
    PlanError
        For a line that is not ``I|Q R C``, a bad value, or a chain with no section.
    """
    chains: dict[str, list[Section]] = {"I": [], "Q": []}
    for number, raw in enumerate(text.splitlines(), 1):
        line = raw.split("#", 1)[0].strip()
        if not line:
            continue
        parts = line.split()
        if len(parts) != 3 or parts[0].upper() not in chains:
            raise PlanError(f"{where}:{number}: expected 'I R C' or 'Q R C' (e.g. 'I 10k 10n'), got {raw.strip()!r}")
        at = f"{where}:{number}: "
        chains[parts[0].upper()].append((parse_value(parts[1], at), parse_value(parts[2], at)))
    for name, sections in chains.items():
        if not sections:
            raise PlanError(f"{where}: the {name} chain has no section; give at least one '{name} R C' line")
    return Network(tuple(chains["I"]), tuple(chains["Q"]), where)


def read_network(path) -> Network:
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise PlanError(f"{p}: cannot read the network file ({getattr(exc, 'strerror', None) or exc})") from None
    return parse_network(text, str(p))


def band_grid(band_hz, points: int = GRID_POINTS) -> np.ndarray:
    lo, hi = (float(b) for b in band_hz)
    if not (np.isfinite(lo) and np.isfinite(hi) and 0 < lo < hi):
        raise PlanError(f"--band {lo:g} {hi:g}: give two frequencies in Hz, 0 < low < high")
    return np.geomspace(lo, hi, points)


def best_trim_deg(error_deg: np.ndarray, axis: int = -1) -> np.ndarray:
    """The constant phase correction that minimises the largest remaining error (minimax):
    minus the middle of the error's range."""
    return -0.5 * (np.max(error_deg, axis=axis) + np.min(error_deg, axis=axis))


def design_report(network: Network, band_hz=DEFAULT_BAND_HZ) -> dict[str, Any]:
    """Ideal phase difference over the band and the suppression it allows (equal amplitudes).

    Returns
    -------
    dict
        ``points`` (frequency, phase difference, phase error, predicted suppression), the range of
        the difference, the worst point, the best constant trim and the worst point after it.

    References
    ----------
    First-order all-pass phase -2·atan(ωRC) (textbook circuit theory); image-rejection relation
    (Razavi, *RF Microelectronics*).

    Examples
    --------
    The bench's example network (see ``examples/bench.network``) over 300-3000 Hz:

    >>> from rtanalyzer.sources.bench.network import EXAMPLE_I_CHAIN, EXAMPLE_Q_CHAIN
    >>> r = design_report(Network(EXAMPLE_I_CHAIN, EXAMPLE_Q_CHAIN))
    >>> round(r["worst_predicted_suppression_db"], 1), round(r["trimmed_worst_predicted_suppression_db"], 1)
    (40.7, 48.4)
    """
    f = band_grid(band_hz)
    diff = network.difference_deg(f)
    error = np.abs(diff) - 90.0
    supp = image_rejection_db(1.0, np.radians(error))
    trim = float(best_trim_deg(error))
    trimmed = image_rejection_db(1.0, np.radians(error + trim))
    k, kt = int(np.argmin(supp)), int(np.argmin(trimmed))
    return {
        "band_hz": [float(band_hz[0]), float(band_hz[1])],
        "points": [
            {"frequency_hz": round(float(a), 2), "phase_difference_deg": round(float(b), 4),
             "phase_error_deg": round(float(c), 4), "predicted_suppression_db": round(float(d), 2)}
            for a, b, c, d in zip(f, diff, error, supp)
        ],
        "min_phase_difference_deg": float(diff.min()),
        "max_phase_difference_deg": float(diff.max()),
        "worst_predicted_suppression_db": float(supp[k]),
        "worst_frequency_hz": float(f[k]),
        "trim_deg": trim,
        "ripple_deg": float(0.5 * (error.max() - error.min())),
        "trimmed_worst_predicted_suppression_db": float(trimmed[kt]),
        "trimmed_worst_frequency_hz": float(f[kt]),
    }


def monte_carlo(network: Network, band_hz=DEFAULT_BAND_HZ, tolerance_r_pct: float = 1.0,
                tolerance_c_pct: float = 5.0, builds: int = 2000, target_db: float = 40.0,
                seed: int | None = 0) -> dict[str, Any]:
    """Spread of the worst in-band suppression over builds with components within tolerance.

    Each build draws every resistor and capacitor independently and uniformly within
    ±tolerance of its value (a part within its tolerance band, no distribution assumed inside
    it; common practice, no source), computes the phase difference over the band, and takes
    the worst suppression with equal amplitudes, as built and after the best constant phase
    trim (a trimmer can take out the mean error, not the ripple).

    Parameters
    ----------
    network : Network
    band_hz : (float, float)
    tolerance_r_pct, tolerance_c_pct : float
        Tolerances in percent (0-50).
    builds : int
        Number of simulated builds (1-100000).
    target_db : float
        Suppression a build must reach at every frequency of the band to count.
    seed : int or None
        Random seed (None: fresh each run).

    Returns
    -------
    dict
        Shares of builds reaching the target (as built, after a trim) and percentiles of the
        worst suppression.

    Raises
    ------
    PlanError
        For a tolerance or count out of range.
    """
    for name, value in (("--tolerance-r", tolerance_r_pct), ("--tolerance-c", tolerance_c_pct)):
        if not (np.isfinite(value) and 0.0 <= value <= 50.0):
            raise PlanError(f"{name} {value:g}: a tolerance in percent, 0 to 50")
    if isinstance(builds, bool) or not 1 <= int(builds) <= 100_000 or int(builds) != builds:
        raise PlanError(f"--builds {builds}: a whole number of builds, 1 to 100000")
    if not np.isfinite(target_db):
        raise PlanError(f"--target-db {target_db}: must be a number of dB")
    f = band_grid(band_hz, 121)
    error = build_errors_deg(network, f, tolerance_r_pct, tolerance_c_pct, int(builds), np.random.default_rng(seed))
    worst = image_rejection_db(1.0, np.radians(np.max(np.abs(error), axis=1)))
    ripple = 0.5 * (error.max(axis=1) - error.min(axis=1))
    trimmed = image_rejection_db(1.0, np.radians(ripple))
    pct = (5, 50, 95)
    return {
        "tolerance_r_percent": float(tolerance_r_pct),
        "tolerance_c_percent": float(tolerance_c_pct),
        "distribution": "uniform within tolerance",
        "builds": int(builds),
        "seed": seed,
        "target_db": float(target_db),
        "share_reaching_target": float(np.mean(worst >= target_db)),
        "share_reaching_target_after_trim": float(np.mean(trimmed >= target_db)),
        "worst_suppression_percentiles_db": {str(p): round(float(np.percentile(worst, p)), 2) for p in pct},
        "trimmed_worst_suppression_percentiles_db": {str(p): round(float(np.percentile(trimmed, p)), 2) for p in pct},
    }


def build_errors_deg(network: Network, frequency_hz: np.ndarray, tolerance_r_pct: float, tolerance_c_pct: float,
                     builds: int, rng: np.random.Generator) -> np.ndarray:
    """Phase error (|difference| - 90°) of ``builds`` random builds, shape (builds, frequencies).

    Every resistor and capacitor is drawn uniformly within ±tolerance of its value, each on its
    own; first-order all-pass phase -2·atan(ωRC) per section.
    """
    omega = 2.0 * np.pi * np.asarray(frequency_hz, dtype=np.float64)
    diff = np.zeros((builds, omega.size))
    for sign, chain in ((1.0, network.chain_i), (-1.0, network.chain_q)):
        for r, c in chain:
            rr = r * (1.0 + tolerance_r_pct / 100.0 * rng.uniform(-1, 1, (builds, 1)))
            cc = c * (1.0 + tolerance_c_pct / 100.0 * rng.uniform(-1, 1, (builds, 1)))
            diff += sign * -2.0 * np.arctan(omega * rr * cc)
    return np.abs(np.degrees(diff)) - 90.0


def error_spread_deg(network: Network, frequency_hz, tolerance_r_pct: float = 1.0, tolerance_c_pct: float = 5.0,
                     builds: int = 1000, seed: int | None = 0, share: float = 0.9) -> tuple[np.ndarray, np.ndarray]:
    """The range of phase error that the middle ``share`` of random builds falls in, per frequency.

    Returns
    -------
    (low, high) : ndarray, ndarray
        Percentiles (1 - share)/2 and (1 + share)/2 of the builds' phase error, degrees.
    """
    error = build_errors_deg(network, np.atleast_1d(frequency_hz), tolerance_r_pct, tolerance_c_pct, builds,
                             np.random.default_rng(seed))
    low, high = np.percentile(error, [50.0 * (1.0 - share), 50.0 * (1.0 + share)], axis=0)
    return low, high


def compare_measured(network: Network, points: list[dict[str, Any]]) -> dict[str, Any]:
    """Measured quadrature points beside the design's phase difference at the same frequencies.

    ``points`` are the ``points`` of an ``analyze quadrature`` result. The difference measured
    minus design is what the build and trimmers add to the design.
    """
    rows = []
    for p in points:
        design = float(network.difference_deg(p["frequency_hz"]))
        measured = p["phase_difference_deg"]
        rows.append({
            "frequency_hz": p["frequency_hz"],
            "measured_phase_difference_deg": measured,
            "design_phase_difference_deg": round(design, 4),
            "difference_deg": round(measured - design, 4),
            "amplitude_ratio_db": p["amplitude_ratio_db"],
            "predicted_suppression_db": p["predicted_suppression_db"],
        })
    diffs = np.array([r["difference_deg"] for r in rows])
    return {
        "points": rows,
        "mean_difference_deg": round(float(diffs.mean()), 4) if rows else None,
        "spread_deg": round(float(diffs.max() - diffs.min()), 4) if rows else None,
    }
