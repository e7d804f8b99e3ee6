"""Benchmark of ``explore --select`` (not a test): ``python benchmarks/bench_explore_select.py``.

Target (issue 17): on 200 participants x 12 columns with ``--kmax 4`` the whole command
(stepwise selection, final Gaussian, skew-normal and t models on the selected columns,
tables and figures) finishes in under 2 minutes on 2 cores. Uses the invented cohort of
sample_records/clustering_cohort.py. Prints the wall time of each repeat.
"""

from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from sleepfuse.explore.cli import main  # noqa: E402
from sleepfuse.explore.simulate import hidden_subgroup_cohort  # noqa: E402

REPEATS = 1
TARGET_S = 120.0


def run() -> list[float]:
    times = []
    with tempfile.TemporaryDirectory() as tmp:
        matrix, _ = hidden_subgroup_cohort(n=200, n_noise=9, seed=17)
        path = Path(tmp) / "matrix.csv"
        matrix.to_csv(path, index=False)
        for i in range(REPEATS):
            start = time.perf_counter()
            code = main(["explore", str(path), "--select", "--kmax", "4", "--out", str(Path(tmp) / f"out{i}")])
            times.append(time.perf_counter() - start)
            assert code == 0
    return times


if __name__ == "__main__":
    times = run()
    print(f"explore --select, 200 x 12, --kmax 4: {', '.join(f'{t:.1f} s' for t in times)} "
          f"(target < {TARGET_S:.0f} s)")
