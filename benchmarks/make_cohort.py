"""Write an invented cohort for the scale benchmarks (not a test): N participants x 14 days.

Each invented participant gets 14 days of 30-s activity counts (one CSV), a
14-night sleep diary and 2 PSG nights (EDF+ hypnograms), made by the seeded
simulation in ``sleepfuse.synthetic.cohort``; no real person's data. The same
N and seed give the same files, byte for byte. Participants are written in
parallel worker processes (one per core by default).

    python benchmarks/make_cohort.py /tmp/cohort200 --n 200
    python benchmarks/make_cohort.py /tmp/cohort1000 --n 1000
"""

from __future__ import annotations

import argparse
import datetime as dt
import os
import sys
import time
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from sleepfuse.synthetic.cohort import ParticipantPlan, simulate_participant  # noqa: E402

TZ = "Europe/Berlin"  # clocks spring forward on 2026-03-29; some participants' fortnights cross it
DAYS = 14
STUDY_TOML = f'''# Invented benchmark cohort: no real participants.
[study]
name = "scale benchmark cohort (invented)"
timezone = "{TZ}"

[actigraphy]
algorithm = "cole-kripke"
# The invented wrist device reports counts about 100 times the Cole–Kripke scale.
count_scale = 0.01
'''
MARKER = ".sleepfuse-benchmark-cohort"


def plan_for(i: int) -> ParticipantPlan:
    """The i-th invented participant: staggered start dates, two PSG nights, 30-s counts."""
    first = dt.date(2026, 3, 2) + dt.timedelta(days=7 * (i % 6))
    psg = [first + dt.timedelta(days=2 + i % 3), first + dt.timedelta(days=9 + i % 3)]
    return ParticipantPlan(
        f"C{i:04d}", first, DAYS, psg_nights=psg, actigraphy_epoch_s=30,
        bedtime_h=22.5 + (i % 7) * 0.25, clock_offset_min=float((i % 5) - 2),
    )


def _write_one(args: tuple[str, int, int]) -> int:
    root, i, seed = args
    simulate_participant(Path(root), plan_for(i), TZ, seed=seed + i)
    return i


def make_cohort(root: Path, n: int, *, seed: int = 20260302, workers: int | None = None) -> Path:
    """Write ``n`` invented participants and a study.toml into ``root`` (created; must be empty or a cohort)."""
    root = Path(root)
    if root.exists() and any(root.iterdir()) and not (root / MARKER).exists():
        raise SystemExit(f"{root} is not empty and not a benchmark cohort; choose another folder")
    for sub in ("psg", "actigraphy", "diary"):
        (root / sub).mkdir(parents=True, exist_ok=True)
    (root / "study.toml").write_text(STUDY_TOML, encoding="utf-8")
    (root / MARKER).write_text(f"n={n} seed={seed}\n", encoding="utf-8")
    workers = workers or os.cpu_count() or 1
    jobs = [(str(root), i, seed) for i in range(n)]
    if workers <= 1:
        for j in jobs:
            _write_one(j)
    else:
        with ProcessPoolExecutor(max_workers=workers) as pool:
            for _ in pool.map(_write_one, jobs, chunksize=8):
                pass
    return root


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("root", type=Path, help="folder to write the cohort into")
    ap.add_argument("--n", type=int, default=200, help="number of invented participants (default 200)")
    ap.add_argument("--seed", type=int, default=20260302)
    ap.add_argument("--workers", type=int, default=None, help="generator processes (default: one per core)")
    args = ap.parse_args(argv)
    t0 = time.perf_counter()
    make_cohort(args.root, args.n, seed=args.seed, workers=args.workers)
    size = sum(p.stat().st_size for p in args.root.rglob("*") if p.is_file())
    print(f"wrote {args.n} invented participants to {args.root} ({size / 1e6:.0f} MB) "
          f"in {time.perf_counter() - t0:.0f} s")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
