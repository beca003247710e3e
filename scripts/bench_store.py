"""Speed of the history store with 10,000 snapshots: listing, filtering, comparing groups.

Fills a temporary store with 10,000 snapshots (sideband and two-tone, each with a 4096-point
spectrum, spread over rigs, tags and a year), then times what a person waits for:

- list all (figures, tags, notes; no spectra), as `history list` does;
- filters: by rig, by tag, by measurement, since a date;
- the newest 50, as a window's timeline would show;
- comparing two groups of 100 tagged snapshots (with their spectra), as `history compare tag:A tag:B`.

Target: 0.2 s or less for each. Run: ``python scripts/bench_store.py`` (prints, asserts nothing).
"""

from __future__ import annotations

import argparse
import tempfile
import time
from pathlib import Path

import numpy as np

from rtanalyzer.store import CompactSpectrum, Snapshot, SnapshotStore, compare
from rtanalyzer.store.snapshot import iso_utc

TARGET_S = 0.2


def _sideband(rng) -> dict:
    worst = float(rng.uniform(25, 60))
    points = [{"tone_hz": t, "wanted_hz": 4007.3 + t, "unwanted_hz": 4007.3 - t, "wanted_dbfs": -8.3,
               "unwanted_dbfs": -8.3 - worst, "unwanted_detected": True, "sideband_suppression_db": worst}
              for t in (700.0, 1500.0)]
    return {"measurement": "sideband", "signal": "channel 1", "sample_rate_hz": 48000.0, "carrier_hz": 4007.3,
            "carrier_dbfs": -54.4, "carrier_detected": True, "carrier_suppression_db": float(rng.uniform(35, 55)),
            "wanted_side": "above", "tuning_offset_hz": 7.3, "points": points, "worst_sideband_suppression_db": worst,
            "worst_is_lower_bound": False, "noise_floor_dbfs": -137.7, "analysis_bandwidth_hz": 1.468,
            "clipped": False, "warnings": []}


def _twotone(rng) -> dict:
    imd = []
    for order in (3, 5, 7, 9):
        v = float(rng.uniform(-70, -25)) - 5 * order
        imd.append({"order": order, "lower_hz": 3507.3, "lower_dbfs": v - 8, "lower_dbc": v + 6, "lower_db_pep": v,
                    "lower_detected": True, "upper_hz": 7107.3, "upper_dbfs": v - 8.1, "upper_dbc": v + 5.9,
                    "upper_db_pep": v - 0.1, "upper_detected": True, "worst_db_pep": v, "worst_is_bound": False})
    return {"measurement": "twotone", "signal": "channel 1", "sample_rate_hz": 48000.0, "tone_hz": [4707.3, 5907.3],
            "tone_dbfs": [-13.9, -13.9], "pep_dbfs": -7.9, "imd": imd, "worst_imd_order": 3,
            "worst_imd_db_pep": imd[0]["worst_db_pep"], "worst_imd_is_bound": False, "noise_floor_dbfs": -137.9,
            "analysis_bandwidth_hz": 1.468, "clipped": False, "warnings": []}


def fill(path: Path, count: int, seed: int = 1) -> None:
    rng = np.random.default_rng(seed)
    t0 = time.time() - 365 * 86400
    base = (-135 + 3 * rng.standard_normal(4096)).astype("<f4")
    snaps = []
    for i in range(count):
        when = t0 + i * (365 * 86400 / count)
        result = _sideband(rng) if i % 3 else _twotone(rng)
        tags = [f"session {i // 50}"]
        if i % 100 < 30 and result["measurement"] == "sideband":
            tags.append("before" if (i // 100) % 2 == 0 else "after")
        snaps.append(Snapshot(
            result["measurement"], result, iso_utc(when), when, rig=f"rig {i % 4}", source="file",
            device=f"take{i}.wav", sample_rate_hz=48000.0,
            plan={"tones_hz": [700.0, 1500.0] if result["measurement"] == "sideband" else [700.0, 1900.0],
                  "carrier_hz": 4000.0, "wanted": "auto", "view": "real", "channel": 1, "resolution_hz": None},
            spectrum=CompactSpectrum(base + np.float32(i % 7), 2.6, 5.86, 0.732, 1.468, False, 8),
            note=f"trim step {i}", tags=tuple(tags),
        ))
    with SnapshotStore.open(path) as store:
        store.add_many(snaps)


def timed(label: str, call, repeat: int = 3) -> float:
    best = float("inf")
    out = None
    for _ in range(repeat):
        start = time.perf_counter()
        out = call()
        best = min(best, time.perf_counter() - start)
    size = len(out) if hasattr(out, "__len__") else ""
    verdict = "ok" if best <= TARGET_S else "SLOW"
    print(f"{label:<52} {best * 1000:8.1f} ms  {str(size):>6}  {verdict}")
    return best


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--count", type=int, default=10_000)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "bench.sqlite3"
        start = time.perf_counter()
        fill(path, args.count)
        print(f"filled {args.count} snapshots in {time.perf_counter() - start:.1f} s "
              f"(one transaction; file {path.stat().st_size / 1e6:.0f} MB)")
        with SnapshotStore.open(path) as store:
            since = time.time() - 30 * 86400
            print(f"{'what (best of 3)':<52} {'time':>11}  {'rows':>6}")
            timed("timeline of all (history list: columns only)", lambda: store.summaries())
            timed("filter: rig", lambda: store.summaries(rig="rig 2"))
            timed("filter: tag", lambda: store.summaries(tags="before"))
            timed("filter: measurement twotone", lambda: store.summaries(measurement="twotone"))
            timed("filter: last 30 days", lambda: store.summaries(since=since))
            timed("newest 50 (a timeline view)", lambda: store.summaries(limit=50, newest_first=True))
            timed("count by rig and measurement", lambda: [store.count(rig="rig 1", measurement="sideband")])
            print("full snapshots (measurement JSON parsed, no spectra):")
            timed("list all", lambda: store.list())
            timed("filter: rig", lambda: store.list(rig="rig 2"))
            timed("filter: last 30 days", lambda: store.list(since=since))

            def groups(spectra):
                a, b = store.select("tag:before", spectra), store.select("tag:after", spectra)
                return compare(a, b, "tag:before", "tag:after").figures

            n_a, n_b = store.count(tags="before"), store.count(tags="after")
            print("compare two groups:")
            timed(f"tag:before ({n_a}) with tag:after ({n_b}) (history compare)", lambda: groups(False))
            timed("the same, loading the spectra too (report overlay)", lambda: groups(True))


if __name__ == "__main__":
    main()
