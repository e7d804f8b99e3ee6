"""A scored study held open for the interface: night table, QC, agreement, review decisions, detail on demand.

No interface code here (the terminal app imports this, never the reverse).
``StudyLoader`` scores participant by participant so a front end can show
rows as they come; ``Workspace`` answers the questions the screens ask
(cell status per participant-night, a night's instruments and parameters,
the agreement of a pair) and records review decisions through
``sleepfuse.study.review``. Epoch detail (hypnograms, per-minute actigraphy) is
kept for every participant of small studies and re-scored on demand, with a
small cache, for big ones, so memory stays bounded.
"""

from __future__ import annotations

import math
import threading
from collections import OrderedDict
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from sleepfuse.fusion.disagreement import rank_disagreements
from sleepfuse.fusion.pairs import agreement_table, paired_nights, shared_parameters
from sleepfuse.model.config import StudyConfig, load_config
from sleepfuse.model.definitions import PAIRS, PARAMETERS, pair_name
from sleepfuse.model.qc import QCEntry, QCLog
from sleepfuse.model.records import SOURCES
from sleepfuse.run.cache import run_cached
from sleepfuse.run.engine import StudyResult
from sleepfuse.run.participant import ParticipantJob, plan_jobs, process_participant
from sleepfuse.run.tables import night_table_of
from sleepfuse.scoring.nights import SOURCE_PARAMETERS, ScoredParticipant, rhythm_table
from sleepfuse.study.review import Decision, apply_decisions, effective, load_decisions, record_decision

SOURCE_LETTER = {"psg": "P", "actigraphy": "A", "diary": "D"}
KEEP_ALL_DETAIL = 64  # studies up to this size keep every participant's epoch detail
DETAIL_CACHE = 16  # otherwise: this many participants' detail, most recent first


@dataclass(frozen=True)
class NightCell:
    """What one participant-night has: per source 'ok', 'excluded' or '' (missing); QC problems (warnings/errors)."""

    status: tuple[str, str, str]
    problems: int

    def glyphs(self) -> str:
        """Four characters, monochrome-readable: P/A/D in fixed places, '·' missing, '×' excluded, then '!' for QC."""
        chars = [SOURCE_LETTER[s] if st == "ok" else ("×" if st == "excluded" else "·")
                 for s, st in zip(SOURCES, self.status)]
        return "".join(chars) + ("!" if self.problems else " ")


@dataclass
class ParameterLine:
    """One parameter of one night: value per source and the pair differences, flagged beyond the limits."""

    parameter: str
    unit: str
    values: dict[str, float]
    differences: dict[str, float]  # pair name -> test − reference
    beyond: dict[str, bool]  # pair name -> outside the study's limits of agreement


class StudyLoader:
    """Discover a study's files now; score its participants chunk by chunk later (for a progress display).

    Participants run through the engine as in batch (``run.cache.run_cached``):
    those whose files and settings are unchanged come from the batch cache
    without their epoch detail, which the workspace re-scores on demand; the
    others are scored (detail kept) and stored.
    """

    def __init__(self, root: str | Path, config: StudyConfig | None = None, *, use_cache: bool = True):
        self.root = Path(root)
        self.config = config if config is not None else load_config(self.root)
        self.qc = QCLog()
        jobs, self.files = plan_jobs(self.config, self.qc)
        self.jobs = {j.participant: j for j in jobs}
        self.scored: list[ScoredParticipant] = []
        self.epoch_rows: list[dict] = []
        self.decisions = load_decisions(self.root)
        self.use_cache = use_cache
        self.from_cache: set[str] = set()  # participants scored from the cache (no epoch detail held)

    @property
    def participants(self) -> list[str]:
        return list(self.jobs)

    def score(self, participants: list[str]) -> pd.DataFrame:
        """Score these participants as batch does (``run.cache.run_cached``); returns their night rows
        with review decisions applied."""
        jobs = [self.jobs[pid] for pid in participants]
        outcomes, report = run_cached(self.config, jobs, self.qc, use_cache=self.use_cache, keep_detail=True)
        if self.use_cache and not report.used:  # the cache cannot be opened: said once, then gone without
            self.use_cache = False
        chunk = []
        for o in outcomes:
            self.epoch_rows += o.epoch_rows
            self.qc.extend(o.qc)
            if o.detail is None:  # from the cache: the epoch detail is re-scored when a night is opened
                self.from_cache.add(o.participant)
            chunk.append(o.detail if o.detail is not None else
                         ScoredParticipant(o.participant, rows=o.rows, rhythm=o.rhythm))
        self.scored += chunk
        return night_table_of(chunk, self.decisions)

    def finish(self) -> "Workspace":
        keep = len(self.scored) <= KEEP_ALL_DETAIL
        return Workspace(self.root, self.config, self.scored, self.qc, self.epoch_rows, jobs=self.jobs,
                         keep_detail=keep, without_detail=self.from_cache)


class Workspace:
    """The open study: everything the screens show, computed once and updated on each review decision."""

    def __init__(self, root: Path, config: StudyConfig, scored: list[ScoredParticipant], qc: QCLog,
                 epoch_rows: list[dict], *, jobs: dict[str, ParticipantJob] | None = None, keep_detail: bool = True,
                 without_detail: set[str] = frozenset(), review_reported: bool = False):
        self.root = Path(root)
        self.config = config
        self.qc = qc
        self.epoch_rows = epoch_rows
        self.participants = [s.participant for s in scored]
        self._jobs = jobs or {}
        self._lock = threading.Lock()
        self._detail: OrderedDict[str, ScoredParticipant] = OrderedDict()
        self._keep_all = keep_detail
        with_detail = [s for s in scored if s.participant not in without_detail]
        for s in with_detail if keep_detail else with_detail[-DETAIL_CACHE:]:
            self._detail[s.participant] = s
        self.base_nights = night_table_of(scored)  # before review decisions
        self.rhythm = rhythm_table(scored)  # IS, IV, M10, L5, RA per participant (cached participants too)
        # the review file's problems are reported once, when the study opens (or were, by run_study)
        self.refresh(None if review_reported else qc)
        self._problems = problems_per_night(qc.entries)

    @classmethod
    def from_result(cls, root: str | Path, result: StudyResult) -> "Workspace":
        """Wrap an already scored study (run_study with keep_detail=True), e.g. for tests."""
        scored = list(result.participants.values())
        qc = QCLog(list(result.qc.entries))
        jobs, _ = plan_jobs(result.config, QCLog())
        return cls(Path(root), result.config, scored, qc, list(result.epoch_rows), jobs={j.participant: j for j in jobs},
                   review_reported=True)

    @classmethod
    def load(cls, root: str | Path) -> "Workspace":
        loader = StudyLoader(root)
        loader.score(loader.participants)
        return loader.finish()

    # --- tables -----------------------------------------------------------------
    def refresh(self, qc: QCLog | None = None) -> None:
        """Re-read the review file and recompute the night table and agreement (problems reported to ``qc``)."""
        self.version = getattr(self, "version", -1) + 1  # screens redraw when it changes
        self.decisions = load_decisions(self.root, qc)
        self.nights = apply_decisions(self.base_nights, self.decisions, qc)
        self.agreement = agreement_table(self.nights, **self.config.agreement.table_options())
        self._index = {(p, n, s): i for i, (p, n, s) in
                       enumerate(zip(self.nights["participant"], self.nights["night"], self.nights["source"]))} \
            if not self.nights.empty else {}

    @property
    def name(self) -> str:
        return self.config.study.name or self.root.name

    def study_nights(self) -> list[str]:
        """Every ISO night from the first to the last night any instrument has."""
        if self.nights.empty:
            return []
        days = pd.to_datetime(self.nights["night"])
        return [d.date().isoformat() for d in pd.date_range(days.min(), days.max(), freq="D")]

    def cells(self, nights: pd.DataFrame | None = None) -> dict[tuple[str, str], NightCell]:
        """(participant, night) -> NightCell for every participant-night in the (given) night table."""
        nights = self.nights if nights is None else nights
        return night_cells(nights, self._problems)

    def row(self, participant: str, night: str, source: str) -> pd.Series | None:
        i = self._index.get((participant, night, source))
        return None if i is None else self.nights.iloc[i]

    def participant_nights(self, participant: str) -> list[str]:
        if self.nights.empty:
            return []
        return sorted(set(self.nights.loc[self.nights["participant"] == participant, "night"]))

    def participant_summary(self, participant: str) -> dict:
        """Nights per source (included / all), QC problems (warnings, errors) and review decisions."""
        rows = self.nights[self.nights["participant"] == participant] if not self.nights.empty else self.nights
        counts = {}
        for s in SOURCES:
            r = rows[rows["source"] == s]
            counts[s] = (int(r["included"].sum()), int(len(r)))
        problems = [e for e in self.qc.for_participant(participant) if e.severity != "info"]
        decisions = [d for k, d in effective(self.decisions).items() if k[0] == participant]
        return {"counts": counts, "problems": problems, "decisions": decisions}

    # --- one night ----------------------------------------------------------------
    def detail(self, participant: str) -> ScoredParticipant:
        """The participant's epoch detail; re-scored from the files when not cached (may take a second)."""
        with self._lock:
            if participant in self._detail:
                self._detail.move_to_end(participant)
                return self._detail[participant]
        job = self._jobs.get(participant)
        scored = process_participant(self.config, job).scored if job is not None else ScoredParticipant(participant)
        with self._lock:
            self._detail[participant] = scored
            if not self._keep_all:
                while len(self._detail) > DETAIL_CACHE:
                    self._detail.popitem(last=False)
        return scored

    def limits(self, pair: str, parameter: str) -> tuple[float, float, float]:
        """(bias, loa_low, loa_high) of agreement.csv for this pair and parameter; NaN when not computed."""
        a = self.agreement
        row = a[(a["pair"] == pair) & (a["parameter"] == parameter)] if not a.empty else a
        if row.empty:
            return math.nan, math.nan, math.nan
        r = row.iloc[0]
        return float(r["bias"]), float(r["loa_low"]), float(r["loa_high"])

    def night_parameters(self, participant: str, night: str) -> list[ParameterLine]:
        """Every parameter any source has that night, side by side, with pair differences flagged beyond the LoA."""
        rows = {s: self.row(participant, night, s) for s in SOURCES}
        lines = []
        for p in dict.fromkeys(x for s in SOURCES for x in SOURCE_PARAMETERS[s]):
            values = {s: float(r[p]) if r is not None and s_has(s, p) else math.nan for s, r in rows.items()}
            if not any(np.isfinite(v) for v in values.values()):
                continue
            diffs, beyond = {}, {}
            for test, ref in PAIRS:
                name = pair_name(test, ref)
                if p not in shared_parameters(test, ref):
                    continue
                both = rows[test] is not None and rows[ref] is not None and bool(rows[test]["included"]) \
                    and bool(rows[ref]["included"])
                d = values[test] - values[ref] if both else math.nan
                diffs[name] = d
                _, low, high = self.limits(name, p)
                beyond[name] = bool(np.isfinite(d) and np.isfinite(low) and (d < low or d > high))
            lines.append(ParameterLine(p, PARAMETERS[p].unit if p in PARAMETERS else "", values, diffs, beyond))
        return lines

    # --- study-wide views -------------------------------------------------------------
    def disagreements(self, test: str, reference: str, parameter: str, *, by: str = "relative") -> pd.DataFrame:
        return rank_disagreements(self.nights, test, reference, parameter, agreement=self.agreement,
                                  epoch_rows=self.epoch_rows, by=by)

    def agreement_points(self, test: str, reference: str, parameter: str) -> pd.DataFrame:
        """Bland–Altman points: participant, night, mean of the two, difference test − reference."""
        paired = paired_nights(self.nights, test, reference) if not self.nights.empty else pd.DataFrame()
        if paired.empty:
            return pd.DataFrame(columns=["participant", "night", "mean", "difference"])
        t, r = paired[f"{parameter}_test"].to_numpy(float), paired[f"{parameter}_ref"].to_numpy(float)
        ok = np.isfinite(t) & np.isfinite(r)
        return pd.DataFrame({"participant": paired["participant"].to_numpy(object)[ok],
                             "night": paired["night"].to_numpy(object)[ok],
                             "mean": ((t + r) / 2)[ok], "difference": (t - r)[ok]})

    def matrix(self, *, min_nights: int = 1) -> pd.DataFrame:
        """The participant × feature matrix (as matrix.csv of ``sleepfuse batch``), review decisions honoured."""
        from sleepfuse.fusion.matrix import participant_matrix

        return participant_matrix(self.nights, self.rhythm, min_nights=min_nights, participants=self.participants)

    def agreement_row(self, test: str, reference: str, parameter: str) -> dict:
        a = self.agreement
        row = a[(a["pair"] == pair_name(test, reference)) & (a["parameter"] == parameter)]
        return row.iloc[0].to_dict() if not row.empty else {}

    # --- review -----------------------------------------------------------------------
    def decide(self, participant: str, night: str, source: str, decision: str, reason: str,
               reviewer: str | None = None) -> Decision:
        """Save one review decision (atomically, in the study's review file, stamped in the study's zone)."""
        d = record_decision(self.root, participant, night, source, decision, reason, reviewer=reviewer,
                            timezone=self.config.timezone)
        self.refresh()
        return d


def problems_per_night(entries: list[QCEntry]) -> dict[tuple[str, str], int]:
    """Warnings and errors per (participant, night): the '!' of a night cell."""
    out: dict[tuple[str, str], int] = {}
    for e in entries:
        if e.severity != "info" and e.participant and e.night:
            out[(e.participant, e.night)] = out.get((e.participant, e.night), 0) + 1
    return out


def s_has(source: str, parameter: str) -> bool:
    return parameter in SOURCE_PARAMETERS[source]


def night_cells(nights: pd.DataFrame, problems: dict[tuple[str, str], int]) -> dict[tuple[str, str], NightCell]:
    """Cell status of every participant-night of a night table (vectorised over rows)."""
    out: dict[tuple[str, str], list] = {}
    pos = {s: i for i, s in enumerate(SOURCES)}
    if nights.empty:
        return {}
    for p, n, s, inc in zip(nights["participant"], nights["night"], nights["source"], nights["included"]):
        st = out.setdefault((p, n), ["", "", ""])
        st[pos[s]] = "ok" if inc else "excluded"
    return {k: NightCell(tuple(v), problems.get(k, 0)) for k, v in out.items()}


@dataclass
class PairChoice:
    """The pair and parameter a screen shows; cycles through PAIRS and the pair's shared parameters."""

    pair_index: int = 0
    parameter: str = "tst_min"
    by: str = "relative"

    @property
    def pair(self) -> tuple[str, str]:
        return PAIRS[self.pair_index]

    @property
    def pair_label(self) -> str:
        return pair_name(*self.pair)

    def parameters(self) -> list[str]:
        return shared_parameters(*self.pair)

    def next_pair(self) -> None:
        self.pair_index = (self.pair_index + 1) % len(PAIRS)
        if self.parameter not in self.parameters():
            self.parameter = self.parameters()[0]

    def next_parameter(self, step: int = 1) -> None:
        params = self.parameters()
        i = params.index(self.parameter) if self.parameter in params else -1
        self.parameter = params[(i + step) % len(params)]
