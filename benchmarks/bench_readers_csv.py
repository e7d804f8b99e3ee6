"""Time the activity-count and diary CSV readers on invented data (performance target: < 0.3 s for 40,320 rows).

Run: python benchmarks/bench_readers_csv.py
"""

from __future__ import annotations

import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

from sleepfuse.readers.actigraphy import read_actigraphy


def write_counts(path: Path, n_rows: int, epoch_s: int = 15, tz: str = "America/Chicago") -> None:
    """An invented wrist recording: n_rows epochs of counts from 2026-10-25 noon (wall clock, crosses the autumn change)."""
    rng = np.random.default_rng(7)
    instants = pd.date_range("2026-10-25 12:00", periods=n_rows, freq=f"{epoch_s}s", tz=tz)
    wall = instants.tz_localize(None).strftime("%Y-%m-%dT%H:%M:%S")
    counts = rng.poisson(40, n_rows)
    pd.DataFrame({"timestamp": wall, "counts": counts, "off_wrist": 0, "marker": 0}).to_csv(path, index=False)


def main() -> None:
    with tempfile.TemporaryDirectory() as tmp:
        for n in (40_320, 80_640):
            path = Path(tmp) / f"P01_{n}.csv"
            write_counts(path, n)
            read_actigraphy(path, "America/Chicago")  # warm-up
            times = []
            for _ in range(5):
                t0 = time.perf_counter()
                rec = read_actigraphy(path, "America/Chicago")
                times.append(time.perf_counter() - t0)
            print(f"read_actigraphy {n} rows: best {min(times):.3f} s, median {np.median(times):.3f} s, "
                  f"{rec.n_epochs} epochs, {len(rec.problems)} problems")


if __name__ == "__main__":
    main()
