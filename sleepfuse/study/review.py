"""Review decisions: exclude or re-include one instrument's night, with a reason.

Kept in ``sleepfuse-review.csv`` in the study folder (never in a source file),
one line per decision, human-readable and written atomically: who decided
(``reviewer``: a name given with ``sleepfuse open --reviewer``, else the
system user) and when (``decided_at``, in the study's time zone with its UTC
offset). The last decision for a (participant, night, source) wins. Batch and the interface
both honour them, and provenance.json lists them.
"""

from __future__ import annotations

import csv
import datetime as dt
import io
from dataclasses import asdict, dataclass
from pathlib import Path

import pandas as pd

from sleepfuse.output.files import write_text
from sleepfuse.model.errors import ConfigError

REVIEW_FILE = "sleepfuse-review.csv"
REVIEW_COLUMNS = ["participant", "night", "source", "decision", "reason", "decided_at", "reviewer"]
DECISIONS = ("exclude", "include")
SOURCES = ("psg", "actigraphy", "diary")


@dataclass(frozen=True)
class Decision:
    participant: str
    night: str  # ISO date
    source: str
    decision: str  # exclude | include
    reason: str
    decided_at: str  # ISO timestamp with the UTC offset (the study's zone; older files: UTC)
    reviewer: str = ""  # who decided (empty in files written before the column existed)


def review_path(study: str | Path) -> Path:
    return Path(study) / REVIEW_FILE


def load_decisions(study: str | Path) -> list[Decision]:
    """All decisions in file order; a malformed line raises ConfigError naming the line."""
    path = review_path(study)
    if not path.exists():
        return []
    text = path.read_text(encoding="utf-8-sig")
    reader = csv.DictReader(io.StringIO(text))
    missing = [c for c in REVIEW_COLUMNS[:5] if c not in (reader.fieldnames or [])]
    if missing:
        raise ConfigError(REVIEW_FILE, ",".join(reader.fieldnames or []), f"columns {', '.join(REVIEW_COLUMNS)}", path)
    out = []
    for i, row in enumerate(reader, start=2):
        decision = (row.get("decision") or "").strip().lower()
        source = (row.get("source") or "").strip().lower()
        night = (row.get("night") or "").strip()
        if decision not in DECISIONS:
            raise ConfigError(f"{REVIEW_FILE} line {i} decision", decision, ", ".join(DECISIONS), path)
        if source not in SOURCES:
            raise ConfigError(f"{REVIEW_FILE} line {i} source", source, ", ".join(SOURCES), path)
        try:
            dt.date.fromisoformat(night)
        except ValueError:
            raise ConfigError(f"{REVIEW_FILE} line {i} night", night, "an ISO date such as 2026-10-31", path) from None
        out.append(Decision((row.get("participant") or "").strip(), night, source, decision,
                            (row.get("reason") or "").strip(), (row.get("decided_at") or "").strip(),
                            (row.get("reviewer") or "").strip()))
    return out


def effective(decisions: list[Decision]) -> dict[tuple[str, str, str], Decision]:
    """The last decision per (participant, night, source)."""
    out: dict[tuple[str, str, str], Decision] = {}
    for d in decisions:
        out[(d.participant, d.night, d.source)] = d
    return out


def default_reviewer() -> str:
    """The system user's name (the reviewer when none is given); 'unknown' where the system cannot tell."""
    import getpass

    try:
        return getpass.getuser()
    except Exception:  # no login name, no USER/LOGNAME variables (some containers)
        return "unknown"


def record_decision(study: str | Path, participant: str, night: str, source: str, decision: str, reason: str,
                    *, reviewer: str | None = None, timezone: str | None = None) -> Decision:
    """Append a decision and rewrite the file atomically; returns the decision saved.

    ``decided_at`` is the time now in ``timezone`` (the study's IANA zone) with
    its offset, e.g. '2026-10-31T09:12:00-05:00'; UTC when no zone is given.
    ``reviewer`` defaults to the system user.
    """
    if decision not in DECISIONS:
        raise ValueError(f"decision must be one of {DECISIONS}, got {decision!r}")
    if source not in SOURCES:
        raise ValueError(f"source must be one of {SOURCES}, got {source!r}")
    if decision == "exclude" and not reason.strip():
        raise ValueError("a reason is required to exclude a night")
    zone = dt.timezone.utc
    if timezone:
        from zoneinfo import ZoneInfo

        zone = ZoneInfo(timezone)
    now = dt.datetime.now(dt.timezone.utc).astimezone(zone).replace(microsecond=0)
    d = Decision(participant, night, source, decision, reason.strip(), now.isoformat(),
                 (reviewer or "").strip() or default_reviewer())
    decisions = load_decisions(study) + [d]
    buf = io.StringIO()
    w = csv.DictWriter(buf, fieldnames=REVIEW_COLUMNS, lineterminator="\n")
    w.writeheader()
    for item in decisions:
        w.writerow(asdict(item))
    write_text(review_path(study), buf.getvalue())
    return d


def apply_decisions(nights: pd.DataFrame, decisions: list[Decision]) -> pd.DataFrame:
    """Honour review decisions on the night table: excluded nights get included=False and the reason in qc."""
    if nights.empty or not decisions:
        return nights
    nights = nights.copy()
    index = {(p, n, s): i for i, (p, n, s) in enumerate(zip(nights["participant"], nights["night"], nights["source"]))}
    for key, d in effective(decisions).items():
        i = index.get(key)
        if i is None:
            continue
        qc = nights.at[i, "qc"]
        if d.decision == "exclude":
            nights.at[i, "included"] = False
            note = f"excluded by review: {d.reason}"
        else:
            nights.at[i, "included"] = True
            note = f"included by review{': ' + d.reason if d.reason else ''}"
        nights.at[i, "qc"] = f"{qc}; {note}" if qc else note
    return nights
