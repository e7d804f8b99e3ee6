"""Benchmark of the scoring algorithms (not a test): ``python benchmarks/bench_scoring.py``.

Scores an invented 14-day actigraphy series of 30-s epochs (summing into
minutes, Cole–Kripke + Webster, Sadeh, Choi non-wear, the rest interval of
each noon-to-noon day, the rest-activity rhythm) and computes the sleep
parameters of a 1,000-epoch hypnogram. Prints median wall times over repeats.
"""

from __future__ import annotations

import statistics
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from sleepfuse.scoring.actigraphy import cole_kripke, epochs_to_minutes, sadeh  # noqa: E402
from sleepfuse.scoring.nonwear import choi_nonwear  # noqa: E402
from sleepfuse.scoring.parameters import sleep_parameters  # noqa: E402
from sleepfuse.scoring.rest_interval import rest_interval  # noqa: E402
from sleepfuse.scoring.rhythm import rest_activity_rhythm  # noqa: E402

EPOCH_S = 30.0
DAYS = 14
REPEATS = 15


def invented_actigraphy(seed: int = 1) -> np.ndarray:
    """14 days of 30-s counts: active days, quiet nights 23:00-07:00, one 3-h off-wrist gap."""
    rng = np.random.default_rng(seed)
    n = DAYS * 24 * 120
    hour = (np.arange(n) * EPOCH_S / 3600.0 + 12.0) % 24  # starts at noon
    night = (hour >= 23) | (hour < 7)
    counts = np.where(night, rng.poisson(0.3, n) * (rng.random(n) < 0.3), rng.poisson(150, n))
    counts = counts.astype(float)
    counts[5 * 2880 + 200 : 5 * 2880 + 200 + 360] = 0.0  # worn-off afternoon
    return counts


def timed(fn, repeats: int = REPEATS) -> float:
    fn()  # warm-up
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def main() -> None:
    counts = invented_actigraphy()
    start = pd.Timestamp("2024-03-04 12:00", tz="Europe/Berlin")
    minutes = epochs_to_minutes(counts, EPOCH_S)
    sleep = cole_kripke(minutes, count_scale=0.01)
    nonwear = choi_nonwear(minutes)
    valid = ~nonwear

    def per_day():
        return [rest_interval(sleep[d * 1440 : (d + 1) * 1440], valid[d * 1440 : (d + 1) * 1440]) for d in range(DAYS)]

    valid_epochs = np.repeat(valid, 2)
    rng = np.random.default_rng(2)
    hyp = rng.choice([0, 1, 2, 3, 4, -1], size=1000, p=[0.15, 0.1, 0.45, 0.15, 0.14, 0.01]).astype(np.int8)

    cases = [
        ("epochs_to_minutes (14 d, 30 s)", lambda: epochs_to_minutes(counts, EPOCH_S)),
        ("Cole-Kripke + Webster (14 d)", lambda: cole_kripke(minutes, count_scale=0.01)),
        ("Sadeh (14 d)", lambda: sadeh(minutes)),
        ("Choi non-wear (14 d)", lambda: choi_nonwear(minutes)),
        ("rest interval, 14 days", per_day),
        ("rest-activity rhythm (14 d, 30 s)", lambda: rest_activity_rhythm(start, EPOCH_S, counts, valid_epochs)),
        ("sleep_parameters (1,000 epochs)", lambda: sleep_parameters(hyp, 30.0, staged=True)),
    ]
    print(f"{counts.size} epochs of {EPOCH_S:g} s = {minutes.size} minutes; median of {REPEATS} repeats")
    total = 0.0
    for name, fn in cases:
        t = timed(fn)
        if name.startswith("sleep_parameters"):
            print(f"  {name:<36s} {t * 1e6:9.1f} µs")
        else:
            total += t
            print(f"  {name:<36s} {t * 1e3:9.2f} ms")
    print(f"  {'14-day actigraphy pipeline, total':<36s} {total * 1e3:9.2f} ms")
    print(f"  (nights found: {sum(r is not None for r in per_day())}/{DAYS}; non-wear minutes: {int(nonwear.sum())})")


if __name__ == "__main__":
    main()
