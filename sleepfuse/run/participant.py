"""One pipeline for both front ends: read a study, score every participant, build the night table.

``process_participant`` is the unit of work (one participant's files in,
scored nights and QC entries out), so batch can run participants one at a
time or in parallel workers with bounded memory.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Iterable, NamedTuple

import pandas as pd

from sleepfuse.model.config import StudyConfig, load_config
from sleepfuse.model.qc import QCEntry, QCLog
from sleepfuse.scoring.nights import ScoredParticipant, rhythm_table, score_participant
from sleepfuse.study.folder import ParticipantJob, load_participant, plan_jobs  # noqa: F401  (re-exported)


@dataclass
class StudyResult:
    """The scored study: night table, rhythm per participant, QC log, per-participant detail."""

    config: StudyConfig
    nights: pd.DataFrame
    rhythm: pd.DataFrame
    qc: QCLog
    participants: dict[str, ScoredParticipant] = field(default_factory=dict)
    files: list[Path] = field(default_factory=list)


class Processed(NamedTuple):
    """One participant read and scored: the scores, the QC entries, and whether it went through."""

    scored: ScoredParticipant
    qc: list[QCEntry]
    complete: bool  # False: an unexpected failure stopped it (one QC error, no rows)


def process_participant(config: StudyConfig, job: ParticipantJob) -> Processed:
    """Read and score one participant; an unexpected failure becomes a QC error, not a crash."""
    qc = QCLog()
    try:
        rec = load_participant(config, job.participant, job.files, qc, job.extra_diary)
        scored = score_participant(config, rec, qc)
        scored.digests = rec.digests
    except Exception as exc:  # one participant never stops the study
        qc.error(not_processed(exc), participant=job.participant)
        return Processed(ScoredParticipant(job.participant), qc.entries, False)
    return Processed(scored, qc.entries, True)


def not_processed(exc: BaseException) -> str:
    """The QC message of a participant an unexpected failure stopped."""
    return f"participant not processed: {type(exc).__name__}: {exc}"


def run_study(
    root: str | Path,
    *,
    config: StudyConfig | None = None,
    progress: Callable[[str, int, int], None] | None = None,
    keep_detail: bool = True,
) -> StudyResult:
    """Score a whole study in this process, participant by participant."""
    config = config if config is not None else load_config(root)
    qc = QCLog()
    jobs, files = plan_jobs(config, qc)
    scored: list[ScoredParticipant] = []
    for i, job in enumerate(jobs):
        if progress:
            progress(job.participant, i, len(jobs))
        s, entries, _ = process_participant(config, job)
        qc.extend(entries)
        scored.append(s)
    return assemble(config, scored, qc, files, keep_detail=keep_detail)


def assemble(config: StudyConfig, scored: Iterable[ScoredParticipant], qc: QCLog, files: list[Path],
             *, keep_detail: bool = True) -> StudyResult:
    from sleepfuse.run.tables import night_table_of
    from sleepfuse.study.review import load_decisions

    scored = list(scored)
    return StudyResult(
        config=config,
        nights=night_table_of(scored, load_decisions(config.root, qc), qc),
        rhythm=rhythm_table(scored),
        qc=qc,
        participants={s.participant: s for s in scored} if keep_detail else {},
        files=files,
    )
