"""``sleepfuse batch``: every output table of DESIGN.md, headless, one participant at a time.

Each participant is read and scored by itself (in this process or in a pool
of worker processes), and only its light results (night rows, rhythm, epoch
agreement rows, QC entries, input checksums) come back, so memory does not
grow with the study beyond the tables themselves. Every file is written
atomically; provenance.json is written last.

Scored participants are kept in the study's incremental cache
(``sleepfuse.run.cache``): a later run recomputes only participants whose files,
configuration or sleepfuse version changed. ``scheduler`` sends the
per-participant work to a Dask cluster (``sleepfuse.run.distributed``).
"""

from __future__ import annotations

import datetime as dt
import json
import math
import platform
import sys
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import numpy as np
import pandas as pd

from sleepfuse import RESEARCH_CAUTION, __version__
from sleepfuse.run._alloc import tune_allocator
from sleepfuse.output.files import atomic_path, write_chunks, write_text
from sleepfuse.run.cache import library_versions, run_cached
from sleepfuse.model.config import StudyConfig, load_config
from sleepfuse.output.csvtext import csv_chunks
from sleepfuse.model.definitions import DEFINITION_CHOICES
from sleepfuse.fusion.agreement import agreement_provenance
from sleepfuse.run.outdir import (PROVENANCE, check_out, earlier_outputs, foreign_files, make_out, remove_leftover_temps,
                                  remove_stale, what_is_left)
from sleepfuse.run.engine import input_record, process_pool
from sleepfuse.run.participant import plan_jobs
from sleepfuse.model.qc import QCLog, study_path
from sleepfuse.run.tables import OUTPUT_TABLES, build_tables
from sleepfuse.study.review import REVIEW_FILE, load_decisions
from sleepfuse.scoring.actigraphy import algorithm_provenance as actigraphy_provenance

FORMATS = ("csv", "parquet")


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
    report: bool = False  # also write report.html (sleepfuse.output.report)


@dataclass
class BatchResult:
    tables: dict[str, pd.DataFrame]
    provenance: dict
    written: list[Path]
    n_participants: int
    n_scored_nights: int
    n_recomputed: int = 0
    n_from_cache: int = 0
    notes: list[str] = field(default_factory=list)  # about the output folder (temporary, stale, foreign files)


def algorithm_provenance(config: StudyConfig) -> dict:
    """provenance.json's "algorithm": the sleep/wake algorithm (scoring/actigraphy.py)."""
    return actigraphy_provenance(config.actigraphy)


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


def run_batch(
    study: str | Path,
    options: BatchOptions,
    *,
    config: StudyConfig | None = None,
    progress: Callable[[str, int, int], None] | None = None,
    argv: list[str] | None = None,
    step_progress: Callable[[str], Callable[[str, int, int], None]] | None = None,
) -> BatchResult:
    """Score the study and write every output table into ``options.out``.

    ``progress(participant, i, n)`` follows the participants; ``step_progress(label)``
    gives the same kind of callback for the later steps ("figures", "report").
    """
    if options.format not in FORMATS:
        raise ValueError(f"format {options.format!r} not in {FORMATS}")
    started = dt.datetime.now(dt.timezone.utc)
    tune_allocator()  # before the pool forks, so its workers inherit it
    config = config if config is not None else load_config(study)
    out = Path(options.out)
    check_out(out, Path(study))  # before any work: a wrong --out is said at once
    qc = QCLog()
    decisions = load_decisions(study, qc)
    jobs, files = plan_jobs(config, qc)
    # The workers are gone before the tables are built: their memory is never held beside the tables'
    # (writing nights.csv in a worker meanwhile saved ~0.05 s but raised the peak by two idle workers).
    pool = process_pool(options.workers, options.scheduler, len(jobs))
    try:
        outcomes, cache_report = run_cached(config, jobs, qc, progress, use_cache=options.cache,
                                             workers=options.workers, scheduler=options.scheduler, pool=pool)
    finally:
        if pool is not None:
            pool.shutdown(wait=True)
    tables = build_tables(config, outcomes, qc, decisions, min_nights=options.min_nights, zscore=options.zscore)
    make_out(out)
    notes = [f"removed {len(t)} temporary files an interrupted earlier run left" for t in [remove_leftover_temps(out)] if t]
    earlier = earlier_outputs(out)
    # provenance.json marks a complete run: remove an older one first, so a run cut short
    # never leaves new tables beside an old run's provenance
    (out / PROVENANCE).unlink(missing_ok=True)
    written: list[Path] = []
    try:
        provenance = _write_outputs(study, config, options, tables, outcomes, files, decisions, cache_report, qc, started,
                       argv, step_progress, written)
    except KeyboardInterrupt:
        raise BatchInterrupted(out, _undo(written, out)) from None
    stale = remove_stale(out, earlier, written)
    if stale:
        notes.append(f"removed {len(stale)} files an earlier run had written here and this run did not "
                     f"({', '.join(stale[:5])}{', ...' if len(stale) > 5 else ''})")
    foreign = foreign_files(out, written)
    if foreign:
        notes.append(f"{len(foreign)} files here were not written by this run and are left as they are: "
                     f"{', '.join(foreign[:5])}{', ...' if len(foreign) > 5 else ''}")
    nights = tables["nights"]
    scored = int(nights["included"].sum()) if not nights.empty else 0
    return BatchResult(tables, provenance, written, len(outcomes), scored, cache_report.recomputed,
                       cache_report.from_cache, notes)


class BatchInterrupted(KeyboardInterrupt):
    """Ctrl-C while the outputs were being written: this run's files were removed; says what is left."""

    def __init__(self, out: Path, left: list[str]):
        self.out, self.left = out, left
        where = (f"{out} still holds {', '.join(left[:8])}{', ...' if len(left) > 8 else ''} "
                 f"(not a complete run: no provenance.json)") if left else f"{out} holds no output"
        super().__init__(f"interrupted while writing; the files this run had written were removed; {where}")


def _undo(written: list[Path], out: Path) -> list[str]:
    """Remove this run's files after an interruption; returns what is left in ``out``."""
    for path in written:
        Path(path).unlink(missing_ok=True)
    remove_leftover_temps(out)
    return what_is_left(out)


def _write_outputs(study, config, options, tables, outcomes, files, decisions, cache_report, qc, started,
                   argv, step_progress, written: list[Path]) -> dict:
    """Every output file, provenance.json last; ``written`` grows as each file is in place."""
    out = Path(options.out)
    for name in OUTPUT_TABLES:
        written.append(write_table(tables[name], out / name, options.format))
    inputs = [i for o in outcomes for i in o.inputs]
    seen = {i["file"] for i in inputs}
    inputs += [input_record(config, p, "diary") for p in files if study_path(p, config.root) not in seen]
    svgs: dict = {}  # figures drawn for plots/, reused by the report
    if options.plots:
        from sleepfuse.output.figures import write_plots

        written += write_plots(tables, out, step_progress("figures") if step_progress else None, svgs)
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
        "agreement_methods": agreement_provenance(**config.agreement.table_options()),
        "definitions": DEFINITION_CHOICES,
        "options": {"format": options.format, "plots": options.plots, "report": options.report,
                    "workers": options.workers,
                    "zscore": options.zscore, "min_nights": options.min_nights, "cache": options.cache,
                    "scheduler": options.scheduler},
        "cache": vars(cache_report),
        "review_decisions": {"file": REVIEW_FILE if decisions else None,
                             "decisions": [vars(d) for d in decisions]},
        "inputs": sorted(inputs, key=lambda i: i["file"]),
        "outputs": [p.relative_to(out).as_posix() for p in written],
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
    if options.report:  # before provenance.json, which marks a complete run
        from sleepfuse.output.report import REPORT_FILE, write_report

        provenance["outputs"].append(REPORT_FILE)
        as_written = json.loads(json.dumps(provenance, default=_json_default))  # what `sleepfuse report` reads
        written.append(write_report(out / REPORT_FILE, tables, as_written,
                                    progress=step_progress("report") if step_progress else None, svgs=svgs))
    write_text(prov_path, json.dumps(provenance, indent=2, default=_json_default, allow_nan=False) + "\n")
    written.append(prov_path)
    return provenance
