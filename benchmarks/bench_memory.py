"""Peak memory of ``sleepfuse batch`` at N = 200 and N = 1,000 invented participants (not a test).

    python benchmarks/bench_memory.py                       # N = 200 and 1000, --workers 2
    python benchmarks/bench_memory.py --n 200 1000 --workers 2

Cohorts come from benchmarks/make_cohort.py (written once into
/tmp/sleepfuse-bench-N and reused). Each run is ``sleepfuse batch STUDY --out
DIR --workers W --no-cache`` as a separate command. Two figures per run:

* tree peak: the largest sum of the resident set sizes (RSS) of the batch
  process and all its worker processes at one moment, sampled every 20 ms
  with psutil (pip install psutil); pages shared by the forked workers are
  counted once per process, so this over-states what the machine must hold;
  the same sum of proportional set sizes (PSS, shared pages split between
  the processes sharing them) is printed beside it;
* largest single process: the peak RSS of the biggest one of them, from the
  kernel (``resource.getrusage(RUSAGE_CHILDREN).ru_maxrss``, exact, no sampling).

Bounded memory means both stay nearly flat from N = 200 to N = 1,000: only
the night table (one row per participant, night and source) grows.
"""

from __future__ import annotations

import argparse
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from bench_batch import ensure_cohort  # noqa: E402


def run_measured(argv: list[str]) -> tuple[float, float | None, float, float | None]:
    """Run a command; return (largest single-process peak MB, sampled RSS-sum peak MB or None, seconds,
    sampled PSS-sum peak MB or None)."""
    try:
        import psutil
    except ImportError:
        psutil = None
    t0 = time.perf_counter()
    proc = subprocess.Popen(argv, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    tree_peak = pss_peak = 0
    if psutil is not None:
        root = psutil.Process(proc.pid)
        while proc.poll() is None:
            total = pss = 0
            try:
                for p in [root, *root.children(recursive=True)]:
                    try:
                        info = p.memory_full_info()
                        total += info.rss
                        pss += getattr(info, "pss", info.rss)
                    except psutil.Error:
                        pass
            except psutil.Error:
                pass
            tree_peak = max(tree_peak, total)
            pss_peak = max(pss_peak, pss)
            time.sleep(0.02)
    rc = proc.wait()
    seconds = time.perf_counter() - t0
    if rc != 0:
        raise SystemExit(f"command failed ({rc}): {' '.join(argv)}")
    single = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024  # kB on Linux
    if psutil is None:
        return single, None, seconds, None
    return single, tree_peak / 2**20, seconds, pss_peak / 2**20


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description="peak RSS of sleepfuse batch at several cohort sizes")
    ap.add_argument("--n", type=int, nargs="+", default=[200, 1000])
    ap.add_argument("--workers", type=int, default=2)
    args = ap.parse_args(argv)
    rows = []
    for n in sorted(args.n):
        root = ensure_cohort(Path(tempfile.gettempdir()) / f"sleepfuse-bench-{n}", n)
        with tempfile.TemporaryDirectory() as tmp:
            cmd = [sys.executable, "-m", "sleepfuse.cli.main", "batch", str(root), "--out", str(Path(tmp) / "out"),
                   "--workers", str(args.workers), "--no-cache"]
            # ru_maxrss of RUSAGE_CHILDREN is a running maximum over all children so far, so
            # sizes run smallest first and each figure is the peak up to and including that run
            single, tree, seconds, pss = run_measured(cmd)
        rows.append((n, single, tree, seconds))
        tree_txt = f"{tree:5.0f} MB RSS, {pss:5.0f} MB PSS" if tree is not None else "(psutil not installed)"
        print(f"N = {n:5d}: tree peak {tree_txt}; largest single process {single:5.0f} MB; {seconds:6.1f} s", flush=True)
    if len(rows) >= 2 and rows[0][2] and rows[-1][2]:
        (n0, _, t0, _), (n1, _, t1, _) = rows[0], rows[-1]
        print(f"tree peak (RSS) grows {t1 - t0:+.0f} MB from N = {n0} to N = {n1} "
              f"({(t1 - t0) / (n1 - n0) * 1024:.0f} kB per extra participant)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
