"""``sleepfuse batch``: every output table of DESIGN.md, headless, one participant at a time.

Each participant is read and scored by itself (in this process or in a pool
of worker processes), and only its light results (night rows, rhythm, epoch
agreement rows, QC entries, input checksums) come back, so memory does not
grow with the study beyond the tables themselves. Every file is written
atomically; provenance.json is written last.

Scored participants are kept in the study's incremental cache
(``sleepfuse.cache``): a later run recomputes only participants whose files,
configuration or sleepfuse version changed. ``scheduler`` sends the
per-participant work to a Dask cluster (``sleepfuse.distributed``).
"""

from __future__ import annotations

import datetime as dt
import json
import math
import platform
import sys
from concurrent.futures import ProcessPoolExecutor, ThreadPoolExecutor, as_completed
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import numpy as np
import pandas as pd

from . import RESEARCH_CAUTION, __version__
from ._alloc import tune_allocator
from .atomic import atomic_path, write_chunks, write_text
from .cache import library_versions
from .config import StudyConfig, load_config
from .csvtext import csv_chunks
from .fusion.epoch_table import epoch_rows, epoch_table
from .fusion.matrix import codebook, participant_matrix
from .fusion.pairs import agreement_table, paired_nights
from .pipeline import ParticipantJob, plan_jobs, process_participant
from .qc import QCEntry, QCLog
from .review import REVIEW_FILE, Decision, apply_decisions, load_decisions
from .scoring.actigraphy import COLE_KRIPKE_COEFFICIENTS
from .scoring.nights import night_table, rhythm_table
from .study import sha256_of

OUTPUT_TABLES = ("nights", "agreement", "epochs_agreement", "matrix", "codebook", "qc")
FORMATS = ("csv", "parquet")


@dataclass
class ParticipantOutcome:
    """What a worker sends back for one participant: small tables, never raw epoch arrays."""

    participant: str
    rows: list[dict]
    rhythm: dict
    epoch_rows: list[dict]
    qc: list[QCEntry]
    inputs: list[dict] = field(default_factory=list)


@dataclass
class BatchOptions:
    out: Path
    format: str = "csv"
    plots: bool = False
    workers: int = 1
    zscore: bool = False
    min_nights: int = 1
    cache: bool = True  # use and update <study>/.sleepfuse-cache/ (False: --no-cache, full run)
    scheduler: str | None = None  # Dask scheduler address, "local" for a LocalCluster, None: no Dask


@dataclass
class BatchResult:
    tables: dict[str, pd.DataFrame]
    provenance: dict
    written: list[Path]
    n_participants: int
    n_scored_nights: int
    n_recomputed: int = 0
    n_from_cache: int = 0


def run_participant(config: StudyConfig, job: ParticipantJob, inputs: list[dict] | None = None) -> ParticipantOutcome:
    """Read, score and compare the instruments of one participant (runs in a worker).

    ``inputs`` are the files' provenance records if already made (checksums
    are computed once, by the caller); otherwise they are made here.
    """
    tune_allocator()  # once per process (forked workers inherit it; Dask workers set it here)
    scored, entries = process_participant(config, job)
    qc = QCLog(list(entries))
    try:
        erows = epoch_rows(config, scored, qc)
    except Exception as exc:  # epoch agreement is optional; never lose the participant for it
        qc.error(f"epoch-by-epoch agreement not computed: {type(exc).__name__}: {exc}", participant=job.participant)
        erows = []
    if inputs is None:
        inputs = job_inputs(config, job, scored.digests)
    return ParticipantOutcome(job.participant, scored.rows, scored.rhythm, erows, qc.entries, list(inputs))


def job_inputs(config: StudyConfig, job: ParticipantJob, digests: dict[Path, str] | None = None) -> list[dict]:
    """Provenance record (relative path, source, SHA-256, size, time) of each of a job's files.

    ``digests``: SHA-256 of files already hashed by their reader (of the very bytes it read)."""
    digests = digests or {}
    return [_input_record(config, p, source, digests.get(p)) for source, paths in job.files.items() for p in paths]


def failed_outcome(config: StudyConfig, job: ParticipantJob, exc: BaseException,
                   inputs: list[dict] | None = None) -> ParticipantOutcome:
    """A participant whose worker crashed: one QC error, no rows (never cached); its files still in provenance."""
    entry = QCEntry("", job.participant, "", "error", f"participant not processed: {type(exc).__name__}: {exc}")
    if inputs is None:
        inputs = job_inputs(config, job)
    return ParticipantOutcome(job.participant, [], {}, [], [entry], list(inputs))


def _input_record(config: StudyConfig, path: Path, source: str, digest: str | None = None) -> dict:
    try:
        stat = path.stat()
        digest = digest or sha256_of(path)
    except OSError as exc:
        return {"file": _rel(config, path), "source": source, "sha256": "", "error": str(exc)}
    return {
        "file": _rel(config, path),
        "source": source,
        "sha256": digest,
        "bytes": stat.st_size,
        "modified": dt.datetime.fromtimestamp(stat.st_mtime, dt.timezone.utc).isoformat(),
    }


def _rel(config: StudyConfig, path: Path) -> str:
    try:
        return str(Path(path).relative_to(config.root))
    except ValueError:
        return str(path)


def _run_jobs(config: StudyConfig, jobs: list[ParticipantJob], workers: int,
              progress: Callable[[str, int, int], None] | None, *,
              inputs: list[list[dict]] | None = None, scheduler: str | None = None,
              on_done: Callable[[int, ParticipantOutcome], None] | None = None,
              done_before: int = 0, total: int | None = None,
              pool: ProcessPoolExecutor | None = None) -> list[ParticipantOutcome]:
    """Run ``run_participant`` for every job: here, in a process pool or on a Dask cluster.

    Outcomes come back sorted by participant whichever way they ran, so the
    tables are the same. ``on_done(index, outcome)`` is called as each one
    arrives (the cache stores it then); progress counts from ``done_before``.
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
        from .distributed import run_jobs_on_dask

        run_jobs_on_dask(config, jobs, inputs, scheduler, workers, finish)
    elif workers <= 1 or n <= 1:
        for k, job in enumerate(jobs):
            if progress:
                progress(job.participant, done_before + k, total)
            finish(k, run_participant(config, job, inputs[k]), k + 1)
    else:
        own = pool is None  # a pool of its own, or the caller's (batch keeps it for writing the tables)
        if own:
            _preload()
            pool = ProcessPoolExecutor(max_workers=min(workers, n))
        try:
            futures = {pool.submit(run_participant, config, job, inputs[k]): k for k, job in enumerate(jobs)}
            for i, fut in enumerate(as_completed(futures)):
                k = futures[fut]
                try:
                    outcome = fut.result()
                except Exception as exc:  # a crashed worker loses one participant, not the study
                    outcome = failed_outcome(config, jobs[k], exc, inputs[k])
                finish(k, outcome, i + 1)
        finally:
            if own:
                pool.shutdown(wait=True)
    if progress:
        progress("", done_before + n, total)
    return sorted(outcomes, key=lambda o: o.participant)


def _process_pool(options: BatchOptions, n_jobs: int) -> ProcessPoolExecutor | None:
    """The worker pool of a run with --workers N > 1 and no Dask scheduler (None otherwise)."""
    if options.scheduler or options.workers <= 1 or n_jobs <= 1:
        return None
    _preload()
    return ProcessPoolExecutor(max_workers=min(options.workers, n_jobs))


def _preload() -> None:
    """Import what every worker needs before the pool forks, so each worker does not import it again."""
    import pyarrow.csv  # noqa: F401

    from .readers import actigraphy, diary, edf  # noqa: F401


def hash_inputs(config: StudyConfig, jobs: list[ParticipantJob], workers: int = 2) -> list[list[dict]]:
    """Provenance records (with SHA-256) of every job's files, hashed on a few threads (hashlib frees the GIL)."""
    if len(jobs) <= 1:
        return [job_inputs(config, j) for j in jobs]
    with ThreadPoolExecutor(max_workers=max(2, min(8, workers))) as pool:
        return list(pool.map(lambda j: job_inputs(config, j), jobs))


def build_tables(config: StudyConfig, outcomes: list[ParticipantOutcome], qc: QCLog, options: BatchOptions,
                 decisions: list[Decision] = ()) -> dict[str, pd.DataFrame]:
    """All output tables from the participants' outcomes, review decisions honoured."""
    from .scoring.nights import ScoredParticipant

    scored = [ScoredParticipant(o.participant, rows=o.rows, rhythm=o.rhythm) for o in outcomes]
    for o in outcomes:
        qc.extend(o.qc)
    nights = apply_decisions(night_table(scored), list(decisions))
    rhythm = rhythm_table(scored)
    matrix = participant_matrix(nights, rhythm, min_nights=options.min_nights, zscore=options.zscore,
                                participants=[o.participant for o in outcomes])
    return {
        "nights": nights,
        "agreement": agreement_table(nights),
        "epochs_agreement": epoch_table([r for o in outcomes for r in o.epoch_rows]),
        "matrix": matrix,
        "codebook": codebook(matrix, min_nights=options.min_nights, zscore=options.zscore,
                             quality_scale=config.diary.quality_scale),
        "qc": qc.to_frame(),
    }


def algorithm_provenance(config: StudyConfig) -> dict:
    act = config.actigraphy
    out = {"actigraphy_algorithm": act.algorithm, "count_scale": act.count_scale, "nonwear": act.nonwear}
    if act.algorithm == "cole-kripke":
        p, weights = COLE_KRIPKE_COEFFICIENTS[act.coefficients]
        out.update(coefficient_set=act.coefficients, P=p, weights_minus4_to_plus2=list(weights),
                   webster_rescoring=act.webster, reference="Cole, Kripke et al. 1992, Sleep 15:461-469")
    else:
        out.update(sadeh_cap=act.sadeh_cap, reference="Sadeh, Sharkey & Carskadon 1994, Sleep 17:201-207")
    return out


def _json_default(value):
    if isinstance(value, (np.integer,)):
        return int(value)
    if isinstance(value, (np.floating,)):
        return None if math.isnan(value) else float(value)
    if isinstance(value, Path):
        return str(value)
    if isinstance(value, (dt.date, dt.datetime, pd.Timestamp)):
        return value.isoformat()
    raise TypeError(f"not JSON serialisable: {type(value).__name__}")


def write_table(df: pd.DataFrame, path_base: Path, fmt: str) -> Path:
    """Write one table atomically as CSV or Parquet."""
    if fmt == "csv":
        path = path_base.with_suffix(".csv")
        write_chunks(path, csv_chunks(df))  # the text of df.to_csv(index=False, lineterminator="\n"), faster
        return path
    path = path_base.with_suffix(".parquet")
    with atomic_path(path) as tmp:
        df.to_parquet(tmp, index=False, engine="pyarrow")
    return path


def write_plots(tables: dict[str, pd.DataFrame], out: Path) -> list[Path]:
    """One Bland–Altman figure (PNG + SVG) per parameter and pair into out/plots/."""
    from .definitions import label_of
    from .fusion.plots import bland_altman_figure, save_figure

    nights = tables["nights"]
    written: list[Path] = []
    for _, stats in tables["agreement"].iterrows():
        test, reference = stats["pair"].split("-")
        paired = paired_nights(nights, test, reference) if not nights.empty else pd.DataFrame()
        param = stats["parameter"]
        if paired.empty:
            t = r = ids = np.array([], dtype=float)
        else:
            t, r, ids = paired[f"{param}_test"].to_numpy(float), paired[f"{param}_ref"].to_numpy(float), paired["participant"].to_numpy(object)
        fig = bland_altman_figure(t, r, stats.to_dict(), parameter=label_of(param), pair=stats["pair"], unit=stats["unit"], participant=ids)
        written += save_figure(fig, out / "plots" / f"{stats['pair']}_{param}")
    return written


def run_batch(
    study: str | Path,
    options: BatchOptions,
    *,
    config: StudyConfig | None = None,
    progress: Callable[[str, int, int], None] | None = None,
    argv: list[str] | None = None,
) -> BatchResult:
    """Score the study and write every output table into ``options.out``."""
    if options.format not in FORMATS:
        raise ValueError(f"format {options.format!r} not in {FORMATS}")
    started = dt.datetime.now(dt.timezone.utc)
    tune_allocator()  # before the pool forks, so its workers inherit it
    config = config if config is not None else load_config(study)
    qc = QCLog()
    decisions = load_decisions(study)
    jobs, files = plan_jobs(config, qc)
    from .cache import run_cached

    out = Path(options.out)
    # The workers are gone before the tables are built: their memory is never held beside the tables'
    # (writing nights.csv in a worker meanwhile saved ~0.05 s but raised the peak by two idle workers).
    pool = _process_pool(options, len(jobs))
    try:
        outcomes, cache_report = run_cached(config, jobs, options, qc, progress, pool=pool)
    finally:
        if pool is not None:
            pool.shutdown(wait=True)
    tables = build_tables(config, outcomes, qc, options, decisions)
    out.mkdir(parents=True, exist_ok=True)
    # provenance.json marks a complete run: remove an older one first, so a run cut short
    # never leaves new tables beside an old run's provenance
    (out / "provenance.json").unlink(missing_ok=True)
    written = [write_table(tables[name], out / name, options.format) for name in OUTPUT_TABLES]
    inputs = [i for o in outcomes for i in o.inputs]
    seen = {i["file"] for i in inputs}
    inputs += [_input_record(config, p, "diary") for p in files if _rel(config, p) not in seen]
    if options.plots:
        written += write_plots(tables, out)
    nights = tables["nights"]
    provenance = {
        "tool": "sleepfuse",
        "version": __version__,
        "caution": RESEARCH_CAUTION,
        "command": argv if argv is not None else sys.argv,
        "started": started.isoformat(),
        "finished": dt.datetime.now(dt.timezone.utc).isoformat(),
        "python": platform.python_version(),
        "libraries": library_versions(("numpy", "pandas", "scipy", "pyedflib", "matplotlib", "pyarrow")),
        "study": str(Path(study).resolve()),
        "configuration": config.to_dict(),
        "algorithm": algorithm_provenance(config),
        "options": {"format": options.format, "plots": options.plots, "workers": options.workers,
                    "zscore": options.zscore, "min_nights": options.min_nights, "cache": options.cache,
                    "scheduler": options.scheduler},
        "cache": vars(cache_report),
        "review_decisions": {"file": REVIEW_FILE if decisions else None,
                             "decisions": [vars(d) for d in decisions]},
        "inputs": sorted(inputs, key=lambda i: i["file"]),
        "outputs": [p.name for p in written],
        "counts": {
            "participants": len(outcomes),
            "participants_recomputed": cache_report.recomputed,
            "participants_from_cache": cache_report.from_cache,
            "nights": int(len(nights)),
            "included_nights": int(nights["included"].sum()) if not nights.empty else 0,
            "qc_errors": int(sum(1 for e in qc if e.severity == "error")),
            "qc_warnings": int(sum(1 for e in qc if e.severity == "warning")),
        },
    }
    prov_path = out / "provenance.json"
    write_text(prov_path, json.dumps(provenance, indent=2, default=_json_default, allow_nan=False) + "\n")
    written.append(prov_path)
    scored = int(nights["included"].sum()) if not nights.empty else 0
    return BatchResult(tables, provenance, written, len(outcomes), scored, cache_report.recomputed,
                       cache_report.from_cache)
