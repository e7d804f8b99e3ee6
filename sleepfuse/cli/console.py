"""Plain-text summaries for the terminal (``sleepfuse check``)."""

from __future__ import annotations

import datetime as dt
from typing import Iterable, TextIO

from sleepfuse import RESEARCH_CAUTION
from sleepfuse.model.config import StudyConfig
from sleepfuse.model.definitions import SOURCE_NAMES
from sleepfuse.model.numbers import plural
from sleepfuse.model.qc import QCEntry, qc_summary

LISTED = 3  # nights listed by date; more are given as a span


def nights_label(nights: list[str]) -> str:
    """'2 nights: 2026-10-28, 2026-11-02'; a longer run 'every night 2026-10-27 to 2026-11-04' or 'between'."""
    nights = sorted(nights)
    if not nights:
        return "none"
    head = plural(len(nights), "night")
    if len(nights) <= LISTED:
        return f"{head}: {', '.join(nights)}"
    first, last = dt.date.fromisoformat(nights[0]), dt.date.fromisoformat(nights[-1])
    if (last - first).days + 1 == len(nights):
        return f"{head}, every night {nights[0]} to {nights[-1]}"
    return f"{head} between {nights[0]} and {nights[-1]}"


def print_check(config: StudyConfig, qc: Iterable[QCEntry], nights: dict[str, dict[str, list[str]]],
                n_files: int, *, quiet: bool = False, out: TextIO) -> None:
    """The QC log (reading, scoring and epoch agreement), then each participant's nights per instrument."""
    qc = list(qc)
    print(f"Study: {config.study.name}   time zone: {config.timezone}   files found: {n_files}", file=out)
    print(f"\nQC log: {qc_summary(qc)}", file=out)
    for e in qc:
        if quiet and e.severity == "info":
            continue
        where = " ".join(x for x in (e.participant, e.night, e.file) if x)
        print(f"  {e.severity.upper():7s} {where}: {e.message}", file=out)
    print("\nNights scored per instrument:", file=out)
    width = max([len(p) for p in nights] + [2])
    for pid in sorted(nights):
        for k, (source, name) in enumerate(SOURCE_NAMES.items()):
            print(f"  {pid if k == 0 else '':{width}s}  {name:<11s}{nights_label(nights[pid].get(source, []))}",
                  file=out)
    if not nights:
        print("  (no participant could be read)", file=out)
    print(f"\n{RESEARCH_CAUTION}", file=out)
