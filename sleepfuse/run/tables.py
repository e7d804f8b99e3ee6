"""The tables of a run, built in one place from the participants' outcomes.

``night_table_of`` assembles the night table (one row per participant ×
night × source, review decisions applied) for every front end: batch, the
terminal app's session, ``sleepfuse score`` and the in-process study run.
``build_tables`` makes every output table of DESIGN.md from it; a new output
table goes here (and into ``OUTPUT_TABLES``). Writing them is ``run.batch``'s.
"""

from __future__ import annotations

from typing import Iterable, Protocol

import pandas as pd

from sleepfuse.fusion.epoch_table import epoch_table
from sleepfuse.fusion.matrix import codebook, participant_matrix
from sleepfuse.fusion.pairs import agreement_table
from sleepfuse.model.config import StudyConfig
from sleepfuse.model.qc import QCLog
from sleepfuse.scoring.nights import night_table, rhythm_table
from sleepfuse.study.review import Decision, apply_decisions

OUTPUT_TABLES = ("nights", "agreement", "epochs_agreement", "matrix", "codebook", "qc")


class Scored(Protocol):
    """What the tables read of a participant: a ``ParticipantOutcome`` or a ``ScoredParticipant``."""

    participant: str
    rows: list[dict]
    rhythm: dict


def night_table_of(participants: Iterable[Scored], decisions: Iterable[Decision] = (),
                   qc: QCLog | None = None) -> pd.DataFrame:
    """The night table of these participants, sorted, review decisions applied (their problems to ``qc``)."""
    return apply_decisions(night_table(list(participants)), list(decisions), qc)


def build_tables(config: StudyConfig, outcomes: list, qc: QCLog, decisions: Iterable[Decision] = (), *,
                 min_nights: int = 1, zscore: bool = False) -> dict[str, pd.DataFrame]:
    """Every output table from the participants' outcomes (their QC entries are added to ``qc`` first)."""
    for o in outcomes:
        qc.extend(o.qc)
    nights = night_table_of(outcomes, decisions, qc)
    matrix = participant_matrix(nights, rhythm_table(outcomes), min_nights=min_nights, zscore=zscore,
                                participants=[o.participant for o in outcomes])
    return {
        "nights": nights,
        "agreement": agreement_table(nights, **config.agreement.table_options()),
        "epochs_agreement": epoch_table([r for o in outcomes for r in o.epoch_rows]),
        "matrix": matrix,
        "codebook": codebook(matrix, min_nights=min_nights, zscore=zscore,
                             quality_scale=config.diary.quality_scale),
        "qc": qc.to_frame(),
    }
