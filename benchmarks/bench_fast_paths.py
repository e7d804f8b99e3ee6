"""What each fast path kept in sleepfuse saves, in ms of one process's time per participant (not a test).

    python benchmarks/bench_fast_paths.py                 # 40 invented participants of the batch cohort
    python benchmarks/bench_fast_paths.py --n 200

Each fast path is timed against the general path still in the package, on the
same files, best of a few repeats in this one process:

* wall-clock columns: ``model.clock.instants._clean_offsets`` (UTC offsets
  over the whole span) against pandas' ``tz_localize`` with the DST rules;
* plain actigraphy CSVs: pyarrow's reader (``readers.actigraphy._read_plain``)
  against the careful path that reads any dialect and reports by line;
* EDF+ annotations: the whole annotation signal read in one pass against
  ``parse_tals`` data record by data record;
* rest-activity hours: hour runs by arithmetic (``scoring.rhythm._hour_runs``)
  against the epoch-by-epoch keys (``_hour_keys``);
* the clock-offset search of the epoch agreement: one cross-correlation
  (``fusion.epochs.night_agreement``) against ``common_grid`` at every offset;
* the glibc allocator tuning (``run._alloc``): whole participants, CPU time, in
  fresh processes with and without ``SLEEPFUSE_MALLOC_TUNING``.

The batch's own figure (``bench_batch.py``) is about 7 ms of wall time per
participant on 2 workers, about 10 ms of CPU; DEVELOPERS.md keeps a fast path
only where it saves a clear share of that.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from bench_batch import ensure_cohort  # noqa: E402


def best(f, repeats: int = 3) -> float:
    out = float("inf")
    for _ in range(repeats):
        t0 = time.perf_counter()
        f()
        out = min(out, time.perf_counter() - t0)
    return out


def swapped(module, name, stand_in, f, repeats: int = 3) -> float:
    """``best(f)`` with ``module.name`` replaced by ``stand_in`` (the general path taken)."""
    saved = getattr(module, name)
    setattr(module, name, stand_in)
    try:
        return best(f, repeats)
    finally:
        setattr(module, name, saved)


def per_participant_cpu(root: Path, n: int, tuning: str) -> float:
    code = (
        "import time\nfrom pathlib import Path\nfrom sleepfuse.model.config import load_config\n"
        "from sleepfuse.model.qc import QCLog\nfrom sleepfuse.run.participant import plan_jobs\n"
        "from sleepfuse.run.engine import run_participant\n"
        f"c = load_config(Path({str(root)!r})); jobs = plan_jobs(c, QCLog())[0][:{n}]\n"
        "run_participant(c, jobs[0])\nt = time.process_time()\n[run_participant(c, j) for j in jobs]\n"
        "print((time.process_time() - t) / len(jobs))\n"
    )
    env = dict(os.environ, SLEEPFUSE_MALLOC_TUNING=tuning, PYTHONPATH=str(Path(__file__).resolve().parents[1]))
    return float(subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True,
                                check=True).stdout.split()[-1])


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n", type=int, default=40, help="participants timed (default 40)")
    ap.add_argument("--cohort", type=Path, default=Path("/tmp/sleepfuse-bench-200"),
                    help="the 200-participant benchmark cohort (written if missing; default %(default)s)")
    args = ap.parse_args()
    root = ensure_cohort(args.cohort, 200)

    import numpy as np

    import sleepfuse.readers.actigraphy as actigraphy
    from sleepfuse.fusion import epochs
    from sleepfuse.model.clock import instants
    from sleepfuse.model.config import load_config
    from sleepfuse.model.qc import QCLog
    from sleepfuse.readers import _edfplus as edfplus
    from sleepfuse.run.participant import plan_jobs, process_participant
    from sleepfuse.scoring import rhythm

    config = load_config(root)
    tz = config.timezone
    jobs = plan_jobs(config, QCLog())[0][: args.n]
    n = len(jobs)
    rows = []

    csvs = [p for j in jobs for p in j.files.get("actigraphy", [])]
    read = lambda: [actigraphy.read_actigraphy(p, tz) for p in csvs]  # noqa: E731
    rows.append(("actigraphy CSV: pyarrow plain path vs the careful line-by-line path",
                 best(read), swapped(actigraphy, "_read_plain", lambda *a, **k: None, read, 1)))

    records = read()
    # each record's epochs as its device wrote them: local wall clock, stepping at a DST change
    walls = [r.epoch_times().tz_localize(None).as_unit("us").asi8 for r in records]
    localize = lambda: [instants.wall_to_utc(w, tz) for w in walls]  # noqa: E731
    rows.append(("wall-clock column: offsets over the span vs tz_localize with the DST rules",
                 best(localize), swapped(instants, "_clean_offsets", lambda *a: None, localize)))

    edfs = [p for j in jobs for p in j.files.get("psg", [])]
    opened = []
    for p in edfs:
        raw = p.read_bytes()
        header = edfplus.read_header(p, raw, len(raw))
        opened.append((p, header, edfplus.data_records(p, header, raw)))

    def record_by_record():
        for _, h, records_ in opened:
            for k in h.annotation_indices:
                s = h.signals[k]
                block = np.ascontiguousarray(records_[:, s.offset: s.offset + 2 * s.n_samples])
                for r in range(h.n_records):
                    edfplus.parse_tals(block[r].tobytes())

    rows.append(("EDF+ annotations: whole signal in one pass vs parse_tals per data record",
                 best(lambda: [edfplus.read_annotation_lists(p, h, r) for p, h, r in opened]),
                 best(record_by_record)))

    def rhythms():
        for rec in records:
            rhythm.rest_activity_rhythm(rec.start, rec.epoch_s, rec.counts, np.isfinite(rec.counts))

    rows.append(("rest-activity hours: hour runs by arithmetic vs epoch-by-epoch keys",
                 best(rhythms), swapped(rhythm, "_hour_runs", lambda *a: None, rhythms)))

    scored = [process_participant(config, j)[0] for j in jobs]
    nights = []
    for s in scored:
        for night, h in sorted(s.hypnograms.items()):
            w = s.windows.get((night, "psg"))
            if w is not None and s.actigraphy:
                a = s.actigraphy[0]
                nights.append((h.start, h.epoch_s, h.stages, a.start, 60.0, a.sleep, a.valid, (w.start, w.end)))
    k_max = int(config.agreement.clock_offset_max_min)

    def search():
        for *x, w in nights:
            epochs.night_agreement(*x, window=w, max_offset_min=k_max)

    def every_offset():
        for *x, w in nights:
            for k in range(-k_max, k_max + 1):
                epochs.epoch_agreement(*epochs.common_grid(*x, window=w, offset_s=60.0 * k))

    rows.append(("clock-offset search: one cross-correlation vs common_grid at each offset",
                 best(search), best(every_offset, 1)))

    print(f"cohort {root}, {n} participants; ms per participant: fast path, general path, saved")
    for name, f, g in rows:
        print(f"  {name:80s} {f / n * 1e3:7.2f} {g / n * 1e3:7.2f} {(g - f) / n * 1e3:7.2f}")
    on, off = per_participant_cpu(root, n, "1"), per_participant_cpu(root, n, "0")
    print(f"  {'glibc allocator tuning: whole participant, CPU time, tuned vs not':80s} "
          f"{on * 1e3:7.2f} {off * 1e3:7.2f} {(off - on) * 1e3:7.2f}")


if __name__ == "__main__":
    main()
