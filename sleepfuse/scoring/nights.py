"""The night table: one row per (participant, night, source), every parameter by one set of definitions.

This is the only table later stages read. Per participant, ``score_participant``
scores each instrument on each night's sleep opportunity and keeps the epoch
series that epoch-by-epoch agreement and the night view need.
"""

from __future__ import annotations

import datetime as dt
import functools
import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from sleepfuse.model.config import StudyConfig
from sleepfuse.model.qc import QCLog, study_path
from sleepfuse.model.records import ActigraphyRecord, DiaryEntry, Hypnogram
from sleepfuse.model.stages import Stage
from sleepfuse.model.records import ParticipantRecords, actigraphy_nights, hypnogram_night
from .actigraphy import epochs_to_minutes, score_sleep_wake
from .diary import DIARY_PARAMETERS, DiaryRowRejected, diary_parameters
from .nonwear import choi_nonwear
from .opportunity import (
    Window,
    cut_window,
    detector_window,
    diary_window,
    edge_minutes,
    exact_times,
    marker_window,
    psg_window,
)
from .parameters import COMMON_PARAMETERS, STAGE_PARAMETERS, sleep_parameters_many
from .night_rows import (  # noqa: F401  (the columns are the night table's: importable from here)
    KEY_COLUMNS,
    NIGHT_COLUMNS,
    PARAMETER_COLUMNS,
    WINDOW_COLUMNS,
    _check_invalid,
    _check_missing,
    _Notes,
    _row,
    _set_window,
    window_texts,
)
from .rhythm import RHYTHM_PARAMETERS, rest_activity_rhythm

SOURCE_PARAMETERS = {
    "psg": [*COMMON_PARAMETERS, *STAGE_PARAMETERS, "unscored_min"],
    "actigraphy": [*COMMON_PARAMETERS, "offwrist_min", "missing_min"],
    "diary": list(DIARY_PARAMETERS),
}


@dataclass
class ActigraphyScoring:
    """One actigraphy record scored per minute: counts, sleep/wake, validity, state codes."""

    path: Path
    start: pd.Timestamp  # start of minute 0
    counts: np.ndarray  # counts per minute (device scale), NaN where missing
    sleep: np.ndarray  # bool per minute (algorithm output)
    nonwear: np.ndarray  # bool per minute
    codes: np.ndarray  # Stage per minute: SLEEP / WAKE / OFFWRIST / UNSCORED
    marker: np.ndarray | None  # bool per minute
    nonwear_rule: str

    @functools.cached_property
    def valid(self) -> np.ndarray:
        """Minutes scored sleep or wake (not off-wrist, not unscored); computed once (codes never change)."""
        return (self.codes == Stage.SLEEP) | (self.codes == Stage.WAKE)

    def minute_times(self) -> pd.DatetimeIndex:
        return self.start + pd.to_timedelta(np.arange(self.codes.size), unit="min")


@dataclass
class ScoredParticipant:
    """Everything scored for one participant: night rows, epoch series, rhythm."""

    participant: str
    rows: list[dict] = field(default_factory=list)
    hypnograms: dict[str, Hypnogram] = field(default_factory=dict)  # ISO night -> hypnogram
    actigraphy: list[ActigraphyScoring] = field(default_factory=list)
    rhythm: dict[str, float] = field(default_factory=dict)
    windows: dict[tuple[str, str], Window] = field(default_factory=dict)  # (night, source) -> window
    diary: dict[str, DiaryEntry] = field(default_factory=dict)  # ISO night -> usable diary row
    digests: dict[Path, str] = field(default_factory=dict)  # SHA-256 of the bytes the readers read, by file


def score_psg(config: StudyConfig, participant: str, hypnograms: list[Hypnogram], qc: QCLog,
              out: ScoredParticipant) -> None:
    """Score a participant's hypnograms, each on its window, the parameters of all in one pass."""
    planned = []
    for h in hypnograms:
        window, why = psg_window(h)
        planned.append((h, window, why, None if window is None else cut_window(h.start, h.epoch_s, h.stages, window)))
    params = {}
    for epoch_s in dict.fromkeys(h.epoch_s for h, window, _, _ in planned if window is not None):
        ks = [k for k, (h, window, _, _) in enumerate(planned) if window is not None and h.epoch_s == epoch_s]
        got = sleep_parameters_many([planned[k][3][0] for k in ks], epoch_s, staged=True,  # [3][0]: window's codes
                                    lps_run_min=config.scoring.lps_run_min,
                                    min_wake_bout_min=config.scoring.min_wake_bout_min)
        params.update(zip(ks, got))
    for k, (h, window, why, cut) in enumerate(planned):
        night = hypnogram_night(h)
        row = _row(participant, night, "psg")
        note = _Notes(qc, row, study_path(h.path, config.root))
        out.hypnograms[row["night"]] = h
        if window is None:
            note("error", why, exclude=True)
            out.rows.append(row)
            continue
        if why:
            note("warning", why)
        _set_window(row, window)
        out.windows[(row["night"], "psg")] = window
        if cut[1] > 0:
            note("warning", f"{cut[1]:.1f} min of the sleep opportunity lie outside the scored hypnogram "
                            "(counted unscored)")
        p = params[k]
        exact_times(p, window, *edge_minutes(h.start, h.epoch_s, window))
        for key in SOURCE_PARAMETERS["psg"]:
            row[key] = p[key]
        if h.unknown_labels:
            labels = ", ".join(f"{k!r} ({v} epochs)" for k, v in h.unknown_labels.items())
            note("warning", f"unknown stage labels counted as unscored: {labels}", logged=True)
        _check_invalid(row, p, note, config)
        out.rows.append(row)


def score_actigraphy_record(config: StudyConfig, rec: ActigraphyRecord, qc: QCLog, participant: str) -> ActigraphyScoring:
    """Sleep/wake and non-wear per minute for one record (SLEEP_PARAMETERS.md, actigraphy)."""
    settings = config.actigraphy
    per = int(round(60 / rec.epoch_s))
    minutes = epochs_to_minutes(rec.counts, rec.epoch_s)
    n_min = minutes.size
    rule = settings.nonwear
    has_column = rec.off_wrist is not None
    if rule == "column" and not has_column:
        qc.warning("actigraphy.nonwear = 'column' but the file has no off_wrist column: no non-wear detected",
                   file=study_path(rec.path, config.root), participant=participant)
    if (rule in ("auto", "column")) and has_column:
        nonwear = rec.off_wrist[: n_min * per].reshape(n_min, per).any(axis=1)
        used = "off_wrist column"
    elif rule in ("auto", "choi"):
        nonwear = choi_nonwear(minutes)
        used = "Choi et al. 2011"
    else:
        nonwear = np.zeros(n_min, dtype=bool)
        used = "none"
    # non-wear minutes, like missing ones, are neither sleep nor wake in the Webster rules
    sleep = score_sleep_wake(rec.counts, rec.epoch_s, settings, unknown=nonwear)[:n_min]
    missing = np.isnan(minutes)
    codes = np.where(sleep, Stage.SLEEP, Stage.WAKE).astype(np.int8)
    codes[nonwear] = Stage.OFFWRIST
    codes[missing & ~nonwear] = Stage.UNSCORED
    marker = None
    if rec.marker is not None:
        marker = rec.marker[: n_min * per].reshape(n_min, per).any(axis=1)
    return ActigraphyScoring(rec.path, rec.start, minutes, sleep, nonwear, codes, marker, used)


def actigraphy_window(config: StudyConfig, night: dt.date, scoring: ActigraphyScoring,
                      diary: DiaryEntry | None) -> Window | None:
    """The night's sleep opportunity: diary times, else event markers, else the automatic rest interval."""
    tz = config.timezone
    window = diary_window(diary)
    if window is None and scoring.marker is not None:
        window = marker_window(scoring.minute_times(), scoring.marker, night, tz)
    if window is None:
        window = detector_window(scoring.start, scoring.sleep & scoring.valid, scoring.valid, night, tz)
    return window


COVERED_TWICE = object()  # a night of a record that an earlier record already covers


def score_actigraphy_windows(
    config: StudyConfig,
    participant: str,
    scoring: ActigraphyScoring,
    nights: list[tuple[dt.date, Window | None | object]],
    qc: QCLog,
    out: ScoredParticipant,
    file: str | None = None,
) -> None:
    """Score the nights of one actigraphy record, each on its window (None: none found;
    COVERED_TWICE: skipped with a warning), the parameters of all in one pass."""
    file = study_path(scoring.path, config.root) if file is None else file
    cuts = {k: cut_window(scoring.start, 60.0, scoring.codes, w) for k, (_, w) in enumerate(nights)
            if w is not None and w is not COVERED_TWICE}
    params = iter(sleep_parameters_many([codes for codes, _ in cuts.values()], 60.0, staged=False,
                                        lps_run_min=config.scoring.lps_run_min,
                                        min_wake_bout_min=config.scoring.min_wake_bout_min))
    keys = SOURCE_PARAMETERS["actigraphy"]
    for k, (night, window) in enumerate(nights):
        if window is COVERED_TWICE:
            qc.warning(f"night {night} is covered by two actigraphy files; the first is used",
                       file=file, participant=participant, night=night)
            continue
        row = _row(participant, night, "actigraphy")
        note = _Notes(qc, row, file)
        if window is None:
            note("info", "no sleep opportunity: no diary times, no event markers, and no rest interval found",
                 exclude=True)
            out.rows.append(row)
            continue
        note("info", f"sleep opportunity from {window.rule}")
        _set_window(row, window)
        out.windows[(row["night"], "actigraphy")] = window
        _, outside = cuts[k]
        if outside > 0:
            note("warning", f"{outside:.0f} min of the sleep opportunity lie outside the recording (counted unscored)")
        p = next(params)
        head, tail = edge_minutes(scoring.start, 60.0, window)
        exact_times(p, window, head, tail)
        p["missing_min"] = p["unscored_min"]  # actigraphy's unscored minutes are the minutes without data
        for key in keys:
            row[key] = p[key]
        _check_missing(row, window.start, head, cuts[k][0], note, config)
        _check_invalid(row, p, note, config)
        out.rows.append(row)


_TST_INPUTS = (("final_awakening", "final awakening"), ("sol_min", "sleep onset latency"), ("waso_min", "WASO"))


def score_diary_entry(config: StudyConfig, participant: str, entry: DiaryEntry, qc: QCLog, out: ScoredParticipant,
                      file: str | None = None) -> DiaryEntry | None:
    """Diary parameters of one row; returns the entry if usable, None if rejected. QC lines name
    ``file``, by default the entry's own file."""
    row = _row(participant, entry.night, "diary")
    note = _Notes(qc, row, entry.file if file is None else file)
    try:
        params = diary_parameters(entry)
    except DiaryRowRejected as exc:
        note("error", f"diary row rejected: {exc}", exclude=True)
        out.rows.append(row)
        return None
    for k in SOURCE_PARAMETERS["diary"]:
        row[k] = params[k]
    w = diary_window(entry)
    absent = [label for key, label in _TST_INPUTS if getattr(entry, key) is None]
    if absent and w is not None:
        note("warning", f"no {', no '.join(absent)} (blank, or its column is missing from the file): TST, SE "
                        "cannot be computed: night not included", exclude=True)
    if w is not None:
        _set_window(row, w)
        out.windows[(row["night"], "diary")] = w
    else:
        note("warning", "tried to sleep or out of bed missing: no sleep opportunity", exclude=True)
    out.rows.append(row)
    return entry


def score_participant(config: StudyConfig, rec: ParticipantRecords, qc: QCLog) -> ScoredParticipant:
    """Score every instrument on every night of one participant."""
    out = ScoredParticipant(rec.participant)
    usable_diary: dict[dt.date, DiaryEntry] = {}
    for entry in rec.diary:
        kept = score_diary_entry(config, rec.participant, entry, qc, out)
        if kept is not None and diary_window(kept) is not None:
            usable_diary[entry.night] = kept
            out.diary[entry.night.isoformat()] = kept
    score_psg(config, rec.participant, rec.hypnograms, qc, out)
    done: set[dt.date] = set()
    best: ActigraphyRecord | None = None
    for a in sorted(rec.actigraphy, key=lambda a: a.start):
        scoring = score_actigraphy_record(config, a, qc, rec.participant)
        out.actigraphy.append(scoring)
        plan: list[tuple[dt.date, Window | None | object]] = []
        for night in actigraphy_nights(a):
            if night in done:
                plan.append((night, COVERED_TWICE))
                continue
            done.add(night)
            plan.append((night, actigraphy_window(config, night, scoring, usable_diary.get(night))))
        score_actigraphy_windows(config, rec.participant, scoring, plan, qc, out, study_path(a.path, config.root))
        if best is None or a.n_epochs > best.n_epochs:
            best, best_scoring = a, scoring
    if best is not None:
        per = int(round(60 / best.epoch_s))
        nonwear_epoch = np.zeros(best.n_epochs, dtype=bool)
        nw = np.repeat(best_scoring.nonwear, per)
        nonwear_epoch[: nw.size] = nw
        valid = ~nonwear_epoch & ~np.isnan(best.counts)
        out.rhythm = rest_activity_rhythm(best.start, best.epoch_s, best.counts, valid)
    window_texts(out.rows)
    return out


def night_table(scored: list[ScoredParticipant]) -> pd.DataFrame:
    """The night table of many participants, sorted, with the documented column order."""
    order = {"psg": 0, "actigraphy": 1, "diary": 2}
    # sorted as rows (a stable sort, as sort_values(kind="stable") would), so the frame is built in order
    rows = sorted((r for s in scored for r in s.rows), key=lambda r: (r["participant"], r["night"], order[r["source"]]))
    df = pd.DataFrame(rows, columns=NIGHT_COLUMNS)
    if df.empty:
        return df
    df["included"] = df["included"].astype(bool)
    return df


def rhythm_table(scored: list[ScoredParticipant]) -> pd.DataFrame:
    """IS, IV, M10, L5, RA per participant (Van Someren et al. 1999)."""
    cols = list(RHYTHM_PARAMETERS)
    rows = [{"participant": s.participant, **{k: s.rhythm.get(k, math.nan) for k in cols}} for s in scored]
    return pd.DataFrame(rows, columns=["participant", *cols])
