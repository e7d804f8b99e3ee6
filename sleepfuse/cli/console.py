"""Plain-text summaries for the terminal (``sleepfuse check``)."""

from __future__ import annotations

from typing import TextIO

from sleepfuse import RESEARCH_CAUTION
from sleepfuse.study.folder import SOURCES, Study


def _nights_label(nights) -> str:
    if not nights:
        return "-"
    if len(nights) == 1:
        return f"1 ({nights[0]})"
    return f"{len(nights)} ({nights[0]} .. {nights[-1]})"


def print_check(study: Study, *, quiet: bool = False, out: TextIO) -> None:
    """The QC log, then one line per participant with the nights of each instrument."""
    cfg = study.config
    print(f"Study: {cfg.study.name}   time zone: {cfg.timezone}   files found: {len(study.files)}", file=out)
    entries = [e for e in study.qc if not quiet or e.severity != "info"]
    counts = {s: sum(1 for e in study.qc if e.severity == s) for s in ("error", "warning", "info")}
    print(f"\nQC log: {counts['error']} errors, {counts['warning']} warnings, {counts['info']} notes", file=out)
    for e in entries:
        where = " ".join(x for x in (e.participant, e.night, e.file) if x)
        print(f"  {e.severity.upper():7s} {where}: {e.message}", file=out)
    print("\nNights per instrument:", file=out)
    width = max([len("participant")] + [len(p) for p in study.participants])
    print(f"  {'participant':{width}s}  " + "  ".join(f"{s:30s}" for s in SOURCES), file=out)
    for pid in study.participant_ids:
        rec = study.participants[pid]
        cells = [_nights_label(rec.nights(s)) for s in SOURCES]
        print(f"  {pid:{width}s}  " + "  ".join(f"{c:30s}" for c in cells), file=out)
    if not study.participants:
        print("  (no participant could be read)", file=out)
    print(f"\n{RESEARCH_CAUTION}", file=out)
