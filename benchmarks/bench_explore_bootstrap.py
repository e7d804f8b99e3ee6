"""Benchmark of ``explore --bootstrap`` (not a test): ``python benchmarks/bench_explore_bootstrap.py [B]``.

Target (issue 17): B = 50 bootstrap refits of the preferred model on 200 participants x 3
columns in under a minute on one core. Uses the three latency columns of the invented cohort
of sample_records/clustering_cohort.py (seed 17), whose preferred model is a skew-normal
mixture with K = 2, so every replicate also fits the Gaussian K = 2 that seeds it. BLAS is
held to one thread. Prints the wall time of the model fit and of the B refits, and the
bootstrap ARI summary.
"""

from __future__ import annotations

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import sys  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from sleepfuse.explore.bootstrap import run_bootstrap  # noqa: E402
from sleepfuse.explore.selection import explore  # noqa: E402
from sleepfuse.explore.simulate import HIDDEN_INFORMATIVE, hidden_subgroup_cohort  # noqa: E402

TARGET_S = 60.0


def run(replicates: int = 50) -> tuple[float, float, object]:
    matrix, _ = hidden_subgroup_cohort(n=200, n_noise=9, seed=17)
    start = time.perf_counter()
    block = explore(matrix, ",".join(HIDDEN_INFORMATIVE)).blocks[0]
    fitted = time.perf_counter() - start
    best = block.preferred
    start = time.perf_counter()
    boot = run_bootstrap(block.data.z, best, replicates, seed=0)
    return fitted, time.perf_counter() - start, boot


if __name__ == "__main__":
    b = int(sys.argv[1]) if len(sys.argv) > 1 else 50
    fitted, took, boot = run(b)
    low, high = boot.interval
    print(f"models (3 families, K = 1..5, 20 starts): {fitted:.1f} s; preferred {boot.family} K={boot.n_components}")
    print(f"bootstrap B = {b} on 200 x 3: {took:.1f} s (target < {TARGET_S:.0f} s on one core); "
          f"ARI mean {boot.mean:.2f}, 2.5-97.5% {low:.2f} to {high:.2f}")
