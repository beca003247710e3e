"""History of adjustments: snapshots of measurements in one SQLite file, compared and reported.

>>> from rtanalyzer.store import SnapshotStore, compare  # doctest: +SKIP
"""

from rtanalyzer.store.comparison import Comparison, FigureChange, FigureValue, compare, render_comparison, spectrum_arrays
from rtanalyzer.store.db import STORE_ENV, SnapshotStore, back_up_unusable, default_store_path, parse_id
from rtanalyzer.store.errors import StoreError, StoreUnusable
from rtanalyzer.store.snapshot import DEFAULT_RIG, Snapshot, generator_settings, make_snapshot, plan_from_settings
from rtanalyzer.store.spectrum import CompactSpectrum, compact_spectrum

__all__ = [
    "CompactSpectrum", "Comparison", "DEFAULT_RIG", "FigureChange", "FigureValue", "STORE_ENV", "Snapshot",
    "SnapshotStore", "StoreError", "StoreUnusable", "back_up_unusable", "compact_spectrum", "compare",
    "default_store_path", "generator_settings", "make_snapshot", "parse_id", "plan_from_settings",
    "render_comparison", "spectrum_arrays",
]
