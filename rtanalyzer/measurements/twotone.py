"""Two-tone linearity: odd-order intermodulation (3rd, 5th, 7th, 9th) in dBc and dB below PEP.

With tones at f_low and f_high (where they land in the capture) and D = f_high - f_low, the
product of order 2k+1 lands at f_low - k*D and f_high + k*D (arithmetic). PEP of two tones of
peak amplitudes A1, A2 is 20*log10(A1 + A2) dBFS (the envelope's peak); dBc is relative to the
stronger tone, dB PEP relative to the PEP (common practice, no source).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Mapping

import numpy as np

from rtanalyzer.dsp.spectrum import Spectrum
from rtanalyzer.dsp.tones import ToneEstimate, tone_near
from rtanalyzer.errors import PlanError
from rtanalyzer.measurements.base import Parameter, settings_with_defaults
from rtanalyzer.measurements.component import Component, measure_at, plan_floor, rounded, spectrum_of
from rtanalyzer.measurements.plan import (
    Lock,
    PlanRequest,
    check_positions,
    guard_hz,
    lock_with_carrier,
    out_of_range,
    strongest_text,
    strongest_tone,
)
from rtanalyzer.measurements.sideband import PLAN_PARAMETERS
from rtanalyzer.measurements.warnings import capture_warnings, lock_warnings, resolution_warnings
from rtanalyzer.sources.capture import Signal

ORDERS = (3, 5, 7, 9)
# Without a carrier, a partner tone must beat the other candidate by this much to be chosen.
PARTNER_MARGIN_DB = 10.0
# Tones differing by more than this get a note (dBc is then relative to the stronger one).
IMBALANCE_NOTE_DB = 1.0


@dataclass(frozen=True)
class Product:
    """One IMD product; ``component`` is None when it folds, passes Nyquist or collides."""

    frequency_hz: float
    component: Component | None

    @property
    def bound_dbfs(self) -> float | None:
        return None if self.component is None else self.component.bound_dbfs

    @property
    def detected(self) -> bool:
        return self.component is not None and self.component.detected


@dataclass(frozen=True)
class ImdOrder:
    order: int
    lower: Product
    upper: Product


@dataclass(frozen=True)
class TwoToneResult:
    sample_rate_hz: float
    tones: tuple[Component, Component]  # low, high (capture frequency)
    orders: tuple[ImdOrder, ...]
    noise_floor_dbfs: float
    analysis_bandwidth_hz: float
    clipped: bool
    signal_label: str
    warnings: tuple[str, ...] = field(default=())
    # Known only with --carrier: the carrier and each tone's unwanted sideband, for the record
    # and the display (a two-tone's IMD figures do not depend on them).
    carrier: Component | None = None
    unwanted: tuple[tuple[float, Component], ...] = ()

    @property
    def pep_dbfs(self) -> float:
        a = sum(np.sqrt(t.power) for t in self.tones)
        return float(20.0 * np.log10(a))

    @property
    def reference_dbfs(self) -> float:
        """The stronger tone: the reference of dBc."""
        return max(t.level_dbfs for t in self.tones)

    def worst(self, order: ImdOrder) -> tuple[float | None, bool]:
        """Worst (closest to zero) dB PEP of the pair, and whether it is only a bound."""
        candidates = [p for p in (order.lower, order.upper) if p.component is not None]
        if not candidates:
            return None, False
        top = max(candidates, key=lambda p: p.bound_dbfs)
        return top.bound_dbfs - self.pep_dbfs, not top.detected

    @property
    def worst_overall(self) -> tuple[int | None, float | None, bool]:
        scored = [(o.order, *self.worst(o)) for o in self.orders if self.worst(o)[0] is not None]
        if not scored:
            return None, None, False
        return max(scored, key=lambda s: s[1])

    def _product_json(self, side: str, p: Product) -> dict[str, Any]:
        ok = p.component is not None
        bound = p.bound_dbfs
        return {
            f"{side}_hz": rounded(p.frequency_hz) if ok else None,
            f"{side}_dbfs": rounded(p.component.level_dbfs) if ok else None,
            f"{side}_dbc": rounded(bound - self.reference_dbfs) if ok else None,
            f"{side}_db_pep": rounded(bound - self.pep_dbfs) if ok else None,
            f"{side}_detected": p.detected,
        }

    def _context_json(self) -> dict[str, Any]:
        """Carrier (dBc below the stronger tone) and unwanted sidebands (dB below their tone)."""
        c = self.carrier
        unwanted = []
        for (tone_hz, u), t in zip(self.unwanted, self.tones):  # both low tone first
            unwanted.append({
                "tone_hz": tone_hz,
                "unwanted_hz": rounded(u.frequency_hz),
                "unwanted_dbfs": rounded(u.level_dbfs),
                "unwanted_detected": u.detected,
                "sideband_suppression_db": rounded(t.level_dbfs - u.bound_dbfs),
            })
        return {
            "carrier_hz": rounded(c.frequency_hz) if c else None,
            "carrier_dbfs": rounded(c.level_dbfs) if c else None,
            "carrier_detected": c.detected if c else None,
            "carrier_suppression_db": rounded(self.reference_dbfs - c.bound_dbfs) if c else None,
            "unwanted": unwanted,
        }

    def to_json(self) -> dict[str, Any]:
        imd = []
        for o in self.orders:
            worst, is_bound = self.worst(o)
            imd.append(
                {
                    "order": o.order,
                    **self._product_json("lower", o.lower),
                    **self._product_json("upper", o.upper),
                    "worst_db_pep": rounded(worst),
                    "worst_is_bound": is_bound,
                }
            )
        order, worst, is_bound = self.worst_overall
        return {
            "measurement": "twotone",
            "signal": self.signal_label,
            "sample_rate_hz": self.sample_rate_hz,
            "tone_hz": [rounded(t.frequency_hz) for t in self.tones],
            "tone_dbfs": [rounded(t.level_dbfs) for t in self.tones],
            "pep_dbfs": rounded(self.pep_dbfs),
            "imd": imd,
            "worst_imd_order": order,
            "worst_imd_db_pep": rounded(worst),
            "worst_imd_is_bound": is_bound,
            **self._context_json(),
            "noise_floor_dbfs": rounded(self.noise_floor_dbfs),
            "analysis_bandwidth_hz": rounded(self.analysis_bandwidth_hz, 4),
            "clipped": self.clipped,
            "warnings": list(self.warnings),
        }


def _pair_without_carrier(spectrum: Spectrum, spacing: float) -> tuple[ToneEstimate, ToneEstimate]:
    """The strongest tone and its partner one spacing above or below it."""
    first = strongest_tone(spectrum)
    candidates = []
    for f in (first.frequency_hz - spacing, first.frequency_hz + spacing):
        if out_of_range(spectrum, f) is None:
            found = tone_near(spectrum, f, 1.5)
            if found is not None:
                candidates.append(found)
    candidates.sort(key=lambda t: t.power, reverse=True)
    if not candidates or measure_at(spectrum, candidates[0].frequency_hz, (first.frequency_hz,)).power is None:
        raise PlanError(
            f"found a tone at {first.frequency_hz:.1f} Hz but no partner {spacing:g} Hz above or "
            "below it: check --tones, or give --carrier"
        )
    if len(candidates) == 2 and 10 * np.log10(candidates[0].power / max(candidates[1].power, 1e-300)) < PARTNER_MARGIN_DB:
        raise PlanError(
            f"tones stand both {spacing:g} Hz below and above {first.frequency_hz:.1f} Hz: give "
            "--carrier so the analyzer knows which pair is the two-tone"
        )
    return tuple(sorted((first, candidates[0]), key=lambda t: t.frequency_hz))


def _context(lock: Lock | None) -> dict[str, float]:
    """Carrier and unwanted places that products must not be confused with."""
    if lock is None:
        return {}
    named = {"carrier": lock.carrier_hz}
    for t in lock.tones_hz:
        named[f"unwanted sideband of the {t:g} Hz tone"] = lock.unwanted_hz(t)
    return named


class TwoToneMeasurement:
    """Plugin: two-tone intermodulation products of orders 3, 5, 7 and 9."""

    name = "twotone"
    summary = "two-tone IMD (3rd, 5th, 7th, 9th order) in dBc and dB below PEP"
    parameters = (
        Parameter("tones", float, "the two modulating tones fed to the exciter", required=True,
                  nargs=2, unit="Hz"),
        *PLAN_PARAMETERS,
    )

    def measure(self, signal: Signal, settings: Mapping[str, Any], spectrum: Spectrum | None = None) -> TwoToneResult:
        """Measure ``signal``; a live engine may pass its running ``spectrum`` of the same signal."""
        s = settings_with_defaults(self, settings)
        f1, f2 = sorted(float(t) for t in s["tones"])
        request = PlanRequest((f1, f2), s["carrier"], s["wanted"], residues=False)
        offline = spectrum is None
        spectrum = spectrum_of(signal, s["resolution"]) if offline else spectrum
        warnings = capture_warnings(signal) + (resolution_warnings(spectrum) if offline else [])
        lock = None
        if request.carrier_hz is not None:
            lock = lock_with_carrier(spectrum, request)
            warnings += lock_warnings(lock, spectrum)
            places = sorted((lock.wanted_hz(f1), lock.wanted_hz(f2)))
        else:
            places = [t.frequency_hz for t in _pair_without_carrier(spectrum, f2 - f1)]
        check_positions(spectrum, {"low tone": places[0], "high tone": places[1]})
        tones = tuple(measure_at(spectrum, f, tuple(places)) for f in places)
        for t in tones:
            if not t.detected:
                raise PlanError(f"no tone stands above the noise at {t.frequency_hz:.1f} Hz: check --tones and "
                                f"--carrier ({strongest_text(spectrum)})")
        low, high = (t.frequency_hz for t in tones)
        spacing = high - low
        context = _context(lock)
        planned = {order: (low - k * spacing, high + k * spacing) for k, order in enumerate(ORDERS, 1)}
        everything = (low, high, *context.values(), *(f for pair in planned.values() for f in pair))
        orders = []
        for order, pair in planned.items():
            products = []
            for side, f in zip(("lower", "upper"), pair):
                problem = out_of_range(spectrum, f) or _collision(spectrum, f, context)
                if problem:
                    warnings.append(f"IMD{order} {side} product at {f:.1f} Hz {problem}: not measured")
                    products.append(Product(f, None))
                else:
                    products.append(Product(f, measure_at(spectrum, f, everything)))
            orders.append(ImdOrder(order, *products))
        carrier, unwanted = None, ()
        if lock is not None:
            # Measured where they do not collide with a product (the products stay the figures).
            products = tuple(f for pair in planned.values() for f in pair)
            guard = guard_hz(spectrum)

            def context(f: float) -> Component | None:
                if out_of_range(spectrum, f) or any(abs(f - g) < guard for g in products):
                    return None
                return measure_at(spectrum, f, everything)

            carrier = context(lock.carrier_hz)
            pairs = [(t, context(lock.unwanted_hz(t))) for t in (f1, f2)]
            unwanted = tuple((t, u) for t, u in pairs if u is not None) if all(u for _, u in pairs) else ()
        levels = [t.level_dbfs for t in tones]
        if abs(levels[0] - levels[1]) > IMBALANCE_NOTE_DB:
            warnings.append(
                f"the tones differ by {abs(levels[0] - levels[1]):.1f} dB: dBc is relative to the stronger one"
            )
        return TwoToneResult(
            sample_rate_hz=signal.rate_hz,
            tones=tones,
            orders=tuple(orders),
            noise_floor_dbfs=plan_floor(spectrum, tuple(f for f in everything if out_of_range(spectrum, f) is None)).level_dbfs,
            analysis_bandwidth_hz=spectrum.enbw_hz,
            clipped=signal.clipped,
            signal_label=signal.label,
            warnings=tuple(warnings),
            carrier=carrier,
            unwanted=unwanted,
        )


def _collision(spectrum: Spectrum, frequency_hz: float, context: dict[str, float]) -> str | None:
    for name, f in context.items():
        if abs(f - frequency_hz) < guard_hz(spectrum) or (
            not spectrum.is_complex and abs(abs(f) - frequency_hz) < guard_hz(spectrum)
        ):
            return f"coincides with the {name}"
    return None
