"""The unit of work: one participant's files read and scored.

``process_participant`` takes one participant's files in and gives scored
nights and QC entries out (and whether it went through), so participants run
one at a time or in parallel workers with bounded memory (``run.engine``).
"""

from __future__ import annotations

from typing import NamedTuple

from sleepfuse.model.config import StudyConfig
from sleepfuse.model.qc import QCEntry, QCLog
from sleepfuse.scoring.nights import ScoredParticipant, score_participant
from sleepfuse.study.folder import ParticipantJob, load_participant, plan_jobs  # noqa: F401  (re-exported)


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
