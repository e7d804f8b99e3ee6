"""Plain in-memory records that readers return; no sleep science here.

All times are tz-aware ``pandas.Timestamp`` in the study's time zone.
``Problem`` carries a non-fatal issue found while reading (a gap, a
duplicate, an unknown label); the study loader turns problems into QC
entries with file, participant and night.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from sleepfuse.model.clock import night_of


@dataclass(frozen=True)
class Problem:
    """A non-fatal reading problem; ``time`` (if known) places it on a night."""

    severity: str  # "info" | "warning" | "error"
    message: str
    time: pd.Timestamp | None = None
    night: dt.date | None = None
    participant: str | None = None  # set when one file holds many participants


class EpochGrid:
    """Epochs of ``epoch_s`` seconds, contiguous in elapsed time from ``start`` (the start of epoch 0);
    the record says how many (``n_epochs``). Shared by hypnograms and actigraphy records."""

    start: pd.Timestamp
    epoch_s: float

    @property
    def n_epochs(self) -> int:  # pragma: no cover - each record defines it
        raise NotImplementedError

    @property
    def end(self) -> pd.Timestamp:
        """The end of the last epoch."""
        return self.start + pd.Timedelta(seconds=self.epoch_s * self.n_epochs)

    def epoch_times(self) -> pd.DatetimeIndex:
        """Start time of every epoch (tz-aware)."""
        return self.start + pd.to_timedelta(np.arange(self.n_epochs) * self.epoch_s, unit="s")


@dataclass
class Hypnogram(EpochGrid):
    """A PSG hypnogram: one stage code (sleepfuse.model.stages.Stage) per epoch.

    ``start`` is the start of epoch 0; epochs are ``epoch_s`` seconds long and
    contiguous in elapsed time. ``record_start`` is the EDF header start time.
    Personal header fields (patient name, birth date) are never stored.
    """

    path: Path
    record_start: pd.Timestamp
    start: pd.Timestamp
    epoch_s: float
    stages: np.ndarray  # int8 Stage codes
    lights_off: pd.Timestamp | None = None
    lights_on: pd.Timestamp | None = None
    unknown_labels: dict[str, int] = field(default_factory=dict)
    problems: list[Problem] = field(default_factory=list)
    sha256: str = ""  # of the bytes read, when the reader read the whole file ("" otherwise)
    detected: dict[str, str] = field(default_factory=dict)  # what the reader found (dialect, columns...): inspect

    @property
    def n_epochs(self) -> int:
        return int(self.stages.size)


@dataclass
class ActigraphyRecord(EpochGrid):
    """Activity counts on a regular epoch grid (gaps filled with NaN counts).

    ``start`` is the first epoch's start; epoch i starts at start + i·epoch_s
    in elapsed time. ``off_wrist`` / ``marker`` are None when the file lacks them.
    """

    path: Path
    start: pd.Timestamp
    epoch_s: int
    counts: np.ndarray  # float64, NaN where missing
    off_wrist: np.ndarray | None = None  # bool
    marker: np.ndarray | None = None  # bool
    problems: list[Problem] = field(default_factory=list)
    sha256: str = ""  # of the bytes read
    detected: dict[str, str] = field(default_factory=dict)  # what the reader found (dialect, columns...): inspect

    @property
    def n_epochs(self) -> int:
        return int(self.counts.size)


@dataclass
class DiaryEntry:
    """One diary row: the night (date the evening began) and its entries."""

    participant: str
    night: dt.date
    line: int  # line number in the source file (1 = header)
    bedtime: pd.Timestamp | None = None
    tried_to_sleep: pd.Timestamp | None = None
    final_awakening: pd.Timestamp | None = None
    out_of_bed: pd.Timestamp | None = None
    sol_min: float | None = None
    nwak: float | None = None
    waso_min: float | None = None
    quality: float | None = None
    file: str = ""  # the diary file, relative to the study folder (set where the file is read), for QC lines


@dataclass
class Diary:
    """All diary rows read from one file."""

    path: Path
    entries: list[DiaryEntry]
    problems: list[Problem] = field(default_factory=list)
    detected: dict[str, str] = field(default_factory=dict)  # what the reader found (dialect, columns...): inspect


SOURCES = ("psg", "actigraphy", "diary")


@dataclass
class ParticipantRecords:
    """Everything read for one participant, with the nights each instrument covers."""

    participant: str
    hypnograms: list[Hypnogram] = field(default_factory=list)
    actigraphy: list[ActigraphyRecord] = field(default_factory=list)
    diary: list[DiaryEntry] = field(default_factory=list)
    files: list[Path] = field(default_factory=list)
    digests: dict[Path, str] = field(default_factory=dict)  # SHA-256 of files whose reader hashed what it read

    def nights(self, source: str) -> list[dt.date]:
        """Sorted nights on which ``source`` has data (noon-to-noon rule)."""
        if source == "psg":
            found = {hypnogram_night(h) for h in self.hypnograms}
        elif source == "actigraphy":
            found = {n for rec in self.actigraphy for n in actigraphy_nights(rec)}
        elif source == "diary":
            found = {e.night for e in self.diary}
        else:
            raise ValueError(f"unknown source {source!r}; allowed: {', '.join(SOURCES)}")
        return sorted(found)


def hypnogram_night(h: Hypnogram) -> dt.date:
    """A PSG recording's night: the night its sleep opportunity (or recording) begins."""
    return night_of(h.lights_off if h.lights_off is not None else h.start)


def actigraphy_nights(rec: ActigraphyRecord) -> list[dt.date]:
    """Every night (noon-to-noon day) that an actigraphy record overlaps."""
    if rec.n_epochs == 0:
        return []
    first = night_of(rec.start)
    last = night_of(rec.end - pd.Timedelta(seconds=rec.epoch_s))
    return [first + dt.timedelta(days=i) for i in range((last - first).days + 1)]
