"""The QC log: one structured list of problems that every stage appends to."""

from __future__ import annotations

import datetime as dt
import os
from dataclasses import dataclass, field
from pathlib import Path, PurePath
from typing import Iterable, Iterator, Literal

Severity = Literal["info", "warning", "error"]
SEVERITIES: tuple[str, ...] = ("info", "warning", "error")
QC_COLUMNS = ["file", "participant", "night", "severity", "message"]


def study_path(path: str | Path, root: str | Path) -> str:
    """A file as QC entries and provenance name it: relative to the study root when inside it,
    else the path as given (what ``Path.relative_to`` gives)."""
    if isinstance(path, PurePath) and isinstance(root, PurePath):
        # Both already normalised by pathlib: the text after the root's is what relative_to gives,
        # without its parsing (~17 µs a call; called for every file a batch reads and names).
        p, r = str(path), str(root)
        if len(p) > len(r) + 1 and p.startswith(r) and p[len(r)] == os.sep and r != os.sep:
            return p[len(r) + 1:]
    try:
        return str(Path(path).relative_to(root))
    except ValueError:
        return str(path)


@dataclass(frozen=True)
class QCEntry:
    """One problem found: where (file, participant, night), how bad, and what to fix."""

    file: str
    participant: str
    night: str  # ISO date, or "" when the problem is not tied to a night
    severity: Severity
    message: str


@dataclass
class QCLog:
    """Append-only list of QC entries, shared by readers' callers, scoring and fusion."""

    entries: list[QCEntry] = field(default_factory=list)

    def add(
        self,
        severity: Severity,
        message: str,
        *,
        file: str | Path | None = "",
        participant: str | None = "",
        night: dt.date | str | None = "",
    ) -> QCEntry:
        if severity not in SEVERITIES:
            raise ValueError(f"severity {severity!r} not in {SEVERITIES}")
        if isinstance(night, dt.date):
            night = night.isoformat()
        entry = QCEntry(
            file=str(file or ""),
            participant=str(participant or ""),
            night=str(night or ""),
            severity=severity,
            message=message,
        )
        self.entries.append(entry)
        return entry

    def info(self, message: str, **where) -> QCEntry:
        return self.add("info", message, **where)

    def warning(self, message: str, **where) -> QCEntry:
        return self.add("warning", message, **where)

    def error(self, message: str, **where) -> QCEntry:
        return self.add("error", message, **where)

    def extend(self, entries: Iterable[QCEntry]) -> None:
        self.entries.extend(entries)

    def __iter__(self) -> Iterator[QCEntry]:
        return iter(self.entries)

    def __len__(self) -> int:
        return len(self.entries)

    def for_participant(self, participant: str) -> list[QCEntry]:
        return [e for e in self.entries if e.participant == participant]

    def to_frame(self):
        """The log as a pandas DataFrame with the columns of qc.csv."""
        import pandas as pd

        return pd.DataFrame([(e.file, e.participant, e.night, e.severity, e.message) for e in self.entries],
                            columns=QC_COLUMNS)


def qc_counts(entries: Iterable[QCEntry | str]) -> dict[str, int]:
    """Entries per severity (error, warning, info): the one count every command and the app print.

    Takes entries or their severities (the 'severity' column of qc.csv).
    """
    counts = {s: 0 for s in ("error", "warning", "info")}
    for e in entries:
        counts[getattr(e, "severity", e)] += 1
    return counts


def qc_summary(entries: Iterable[QCEntry | str]) -> str:
    """'1 error, 4 warnings, 65 notes': the QC log in one line, worded the same everywhere."""
    from sleepfuse.model.numbers import plural

    c = qc_counts(entries)
    return f"{plural(c['error'], 'error')}, {plural(c['warning'], 'warning')}, {plural(c['info'], 'note')}"
