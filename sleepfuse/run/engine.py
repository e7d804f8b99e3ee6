"""The unit of work and how it runs: one participant read, scored and compared, here or in workers.

``run_participant`` is what every front end runs for a participant (batch, the
terminal app's session, Dask workers); ``run_jobs`` runs many of them in this
process, in a process pool or on a Dask cluster, and hands each outcome back
as it arrives (``run.cache.run_cached`` puts the cache in front of it for batch
and the app). ``run_study_jobs`` runs a whole study in this process (``check``,
``score``); ``run_study`` adds its tables (tests, preloaded apps). Output
tables are built in ``run.tables``.
"""

from __future__ import annotations

import datetime as dt
import gc
from concurrent.futures import ProcessPoolExecutor, ThreadPoolExecutor, as_completed
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import pandas as pd

from sleepfuse.fusion.epoch_table import epoch_rows
from sleepfuse.model.config import StudyConfig, load_config
from sleepfuse.model.qc import QCEntry, QCLog, study_path
from sleepfuse.run._alloc import tune_allocator
from sleepfuse.run.participant import ParticipantJob, not_processed, plan_jobs, process_participant
from sleepfuse.run.tables import night_table_of
from sleepfuse.scoring.nights import ScoredParticipant, rhythm_table
from sleepfuse.study.folder import sha256_of
from sleepfuse.study.review import load_decisions


@dataclass
class ParticipantOutcome:
    """What a worker sends back for one participant: small tables, never raw epoch arrays.

    ``complete`` is False when an unexpected failure stopped the participant or
    its epoch agreement (such an outcome is never cached, so it is recomputed
    next time). ``detail``, the scored epoch series, is kept only when asked for
    and only in this process (the terminal app's session); it is never cached.
    """

    participant: str
    rows: list[dict]
    rhythm: dict
    epoch_rows: list[dict]
    qc: list[QCEntry]
    inputs: list[dict] = field(default_factory=list)
    complete: bool = True
    detail: ScoredParticipant | None = field(default=None, repr=False, compare=False)


def run_participant(config: StudyConfig, job: ParticipantJob, inputs: list[dict] | None = None, *,
                    keep_detail: bool = False) -> ParticipantOutcome:
    """Read, score and compare the instruments of one participant (runs in a worker).

    ``inputs`` are the files' provenance records if already made (checksums
    are computed once, by the caller); otherwise they are made here.
    ``keep_detail`` keeps the scored epoch series in the outcome (``detail``).
    """
    tune_allocator()  # once per process (forked workers inherit it; Dask workers set it here)
    scored, entries, complete = process_participant(config, job)
    qc = QCLog(list(entries))
    try:
        erows = epoch_rows(config, scored, qc)
    except Exception as exc:  # epoch agreement is optional; never lose the participant for it
        qc.error(f"epoch-by-epoch agreement not computed: {type(exc).__name__}: {exc}", participant=job.participant)
        erows, complete = [], False
    if inputs is None:
        inputs = job_inputs(config, job, scored.digests)
    return ParticipantOutcome(job.participant, scored.rows, scored.rhythm, erows, qc.entries, list(inputs),
                              complete, scored if keep_detail else None)


def run_study_jobs(config: StudyConfig, *, progress: Callable[[str, int, int], None] | None = None,
                   workers: int = 1, keep_detail: bool = False) -> tuple[list[ParticipantOutcome], QCLog, list[Path]]:
    """Every participant run as batch runs them; the QC log holds what reading, scoring and epoch agreement found.

    ``check``, ``score`` and ``run_study`` use this, so their QC counts are the
    counts of ``batch`` and of the app for the same study.
    """
    qc = QCLog()
    jobs, files = plan_jobs(config, qc)
    outcomes = run_jobs(config, jobs, workers, progress, keep_detail=keep_detail)
    for o in outcomes:
        qc.extend(o.qc)
    return outcomes, qc, files


@dataclass
class StudyResult:
    """The scored study: night table, rhythm per participant, QC log, per-participant detail, epoch rows."""

    config: StudyConfig
    nights: pd.DataFrame
    rhythm: pd.DataFrame
    qc: QCLog
    participants: dict[str, ScoredParticipant] = field(default_factory=dict)
    files: list[Path] = field(default_factory=list)
    epoch_rows: list[dict] = field(default_factory=list)


def run_study(root: str | Path, *, config: StudyConfig | None = None,
              progress: Callable[[str, int, int], None] | None = None, keep_detail: bool = True) -> StudyResult:
    """Score a whole study in this process as batch does (no cache), with its night table and review
    decisions: for tests and the app's preloaded studies. ``keep_detail`` keeps every participant's epoch series."""
    config = config if config is not None else load_config(root)
    outcomes, qc, files = run_study_jobs(config, progress=progress, keep_detail=keep_detail)
    nights = night_table_of(outcomes, load_decisions(config.root, qc), qc)
    return StudyResult(config, nights, rhythm_table(outcomes), qc,
                       participants={o.participant: o.detail for o in outcomes if o.detail is not None},
                       files=files, epoch_rows=[r for o in outcomes for r in o.epoch_rows])


def job_inputs(config: StudyConfig, job: ParticipantJob, digests: dict[Path, str] | None = None) -> list[dict]:
    """Provenance record (relative path, source, SHA-256, size, time) of each of a job's files.

    ``digests``: SHA-256 of files already hashed by their reader (of the very bytes it read)."""
    digests = digests or {}
    return [input_record(config, p, source, digests.get(p)) for source, paths in job.files.items() for p in paths]


def failed_outcome(config: StudyConfig, job: ParticipantJob, exc: BaseException,
                   inputs: list[dict] | None = None) -> ParticipantOutcome:
    """A participant whose worker crashed: one QC error, no rows (never cached); its files still in provenance."""
    entry = QCEntry("", job.participant, "", "error", not_processed(exc))
    if inputs is None:
        inputs = job_inputs(config, job)
    return ParticipantOutcome(job.participant, [], {}, [], [entry], list(inputs), complete=False)


def input_record(config: StudyConfig, path: Path, source: str, digest: str | None = None) -> dict:
    try:
        stat = path.stat()
        digest = digest or sha256_of(path)
    except OSError as exc:
        return {"file": study_path(path, config.root), "source": source, "sha256": "", "error": str(exc)}
    return {
        "file": study_path(path, config.root),
        "source": source,
        "sha256": digest,
        "bytes": stat.st_size,
        "modified": dt.datetime.fromtimestamp(stat.st_mtime, dt.timezone.utc).isoformat(),
    }


def run_jobs(config: StudyConfig, jobs: list[ParticipantJob], workers: int,
              progress: Callable[[str, int, int], None] | None, *,
              inputs: list[list[dict]] | None = None, scheduler: str | None = None,
              on_done: Callable[[int, ParticipantOutcome], None] | None = None,
              done_before: int = 0, total: int | None = None,
              pool: ProcessPoolExecutor | None = None, keep_detail: bool = False) -> list[ParticipantOutcome]:
    """Run ``run_participant`` for every job: here, in a process pool or on a Dask cluster.

    Outcomes come back sorted by participant whichever way they ran, so the
    tables are the same. ``on_done(index, outcome)`` is called as each one
    arrives (the cache stores it then); progress counts from ``done_before``.
    ``keep_detail`` (the epoch series in each outcome) applies to a run in this process only.
    """
    outcomes: list[ParticipantOutcome] = []
    n = len(jobs)
    total = n + done_before if total is None else total
    inputs = inputs if inputs is not None else [None] * n  # type: ignore[list-item]

    def finish(k: int, outcome: ParticipantOutcome, i: int) -> None:
        outcomes.append(outcome)
        if on_done:
            on_done(k, outcome)
        if progress:
            progress(jobs[k].participant, done_before + i, total)

    if scheduler:
        from sleepfuse.run.distributed import run_jobs_on_dask

        run_jobs_on_dask(config, jobs, inputs, scheduler, workers, finish,
                         run_one=run_participant, on_error=failed_outcome)
    elif workers <= 1 or n <= 1:
        for k, job in enumerate(jobs):
            if progress:
                progress(job.participant, done_before + k, total)
            finish(k, run_participant(config, job, inputs[k], keep_detail=keep_detail), k + 1)
    else:
        own = pool is None  # a pool of its own, or the caller's (batch keeps it for writing the tables)
        if own:
            pool = _new_pool(min(workers, n))
        try:
            futures = {pool.submit(run_chunk, config, jobs[a:b], inputs[a:b]): (a, b)
                       for a, b in task_bounds(n, workers)}
            i = 0
            for fut in as_completed(futures):
                a, b = futures[fut]
                try:
                    got = fut.result()
                except Exception as exc:  # the worker died: its few participants are lost, not the study
                    got = [failed_outcome(config, job, exc, inp) for job, inp in zip(jobs[a:b], inputs[a:b])]
                for j, outcome in enumerate(got):
                    i += 1
                    finish(a + j, outcome, i)
        finally:
            if own:
                pool.shutdown(wait=True)
    if progress:
        progress("", done_before + n, total)
    return sorted(outcomes, key=lambda o: o.participant)


def task_bounds(n: int, workers: int) -> list[tuple[int, int]]:
    """The pool's tasks as [start, stop) ranges of the jobs: a few participants each, single ones at the end.

    Every task costs a round trip through the pool (pickling, two pipes, a
    wake-up of this process), so most tasks hold up to 4 participants (about 8
    tasks per worker); the last 2 per worker hold one each, so the workers
    finish within about one participant's time of each other (DEVELOPERS.md).
    """
    size = max(1, min(4, n // (workers * 8)))
    tail = min(n, 2 * workers) if size > 1 else 0
    bounds = [(a, min(a + size, n - tail)) for a in range(0, n - tail, size)]
    return bounds + [(a, a + 1) for a in range(n - tail, n)]


def run_chunk(config: StudyConfig, jobs: list[ParticipantJob], inputs: list) -> list[ParticipantOutcome]:
    """``run_participant`` for a few participants in one pool task; an exception loses only its participant."""
    out = []
    for job, inp in zip(jobs, inputs):
        try:
            out.append(run_participant(config, job, inp))
        except Exception as exc:
            out.append(failed_outcome(config, job, exc, inp))
    return out


def process_pool(workers: int, scheduler: str | None, n_jobs: int) -> ProcessPoolExecutor | None:
    """The worker pool of a run with --workers N > 1 and no Dask scheduler (None otherwise)."""
    if scheduler or workers <= 1 or n_jobs <= 1:
        return None
    return _new_pool(min(workers, n_jobs))


def _new_pool(workers: int) -> ProcessPoolExecutor:
    """A process pool whose workers fork from this process with the readers imported.

    ``gc.freeze`` first (the Python docs' advice for fork without exec): the
    objects this process holds then are never traversed by the workers'
    collections, so those do not touch, and copy, the pages they share.
    """
    _preload()
    gc.freeze()  # measured: about 2 % off three batches of the 200-participant cohort (DEVELOPERS.md)
    return _FrozenPool(max_workers=workers)


class _FrozenPool(ProcessPoolExecutor):
    """A process pool that gives this process's objects back to its collector once shut down."""

    def shutdown(self, wait: bool = True, *, cancel_futures: bool = False) -> None:
        super().shutdown(wait=wait, cancel_futures=cancel_futures)
        gc.unfreeze()


def _preload() -> None:
    """Import what every worker needs before the pool forks, so each worker does not import it again."""
    import pyarrow.csv  # noqa: F401

    from sleepfuse.readers import actigraphy, diary, edf  # noqa: F401


def hash_inputs(config: StudyConfig, jobs: list[ParticipantJob], workers: int = 2) -> list[list[dict]]:
    """Provenance records (with SHA-256) of every job's files, hashed on a few threads (hashlib frees the GIL)."""
    if len(jobs) <= 1:
        return [job_inputs(config, j) for j in jobs]
    with ThreadPoolExecutor(max_workers=max(2, min(8, workers))) as pool:
        return list(pool.map(lambda j: job_inputs(config, j), jobs))
