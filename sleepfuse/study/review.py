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
from sleepfuse.model.qc import QCLog
from sleepfuse.model.records import SOURCES

REVIEW_FILE = "sleepfuse-review.csv"
REVIEW_COLUMNS = ["participant", "night", "source", "decision", "reason", "decided_at", "reviewer"]
DECISIONS = ("exclude", "include")


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


def load_decisions(study: str | Path, qc: QCLog | None = None) -> list[Decision]:
    """All well-formed decisions in file order.

    A malformed line is skipped and reported to ``qc`` (an error naming the
    line number and the reason); the good lines still count. A file that
    cannot be read at all (not UTF-8, columns missing) gives one error and
    no decisions. Nothing here ever stops a run."""
    path = review_path(study)
    if not path.is_file():
        return []
    report = (lambda line, why: qc.error(f"line {line}: {why}; this line is ignored", file=REVIEW_FILE)) \
        if qc is not None else (lambda line, why: None)
    try:
        text = path.read_text(encoding="utf-8-sig")
    except (OSError, UnicodeDecodeError) as exc:
        if qc is not None:
            qc.error(f"cannot be read ({type(exc).__name__}); no review decision applied", file=REVIEW_FILE)
        return []
    reader = csv.DictReader(io.StringIO(text))
    try:
        fields = reader.fieldnames or []
    except csv.Error as exc:
        fields, _ = [], exc
    missing = [c for c in REVIEW_COLUMNS[:5] if c not in fields]
    if missing:
        if qc is not None:
            qc.error(f"line 1: the header lacks the columns {', '.join(missing)} (expected "
                     f"{', '.join(REVIEW_COLUMNS)}); no review decision applied", file=REVIEW_FILE)
        return []
    out = []
    while True:
        try:
            row = next(reader)
        except StopIteration:
            break
        except csv.Error as exc:
            report(reader.line_num, f"not readable as CSV ({exc})")
            continue
        line = reader.line_num
        why = _line_problem(row)
        if why:
            report(line, why)
            continue
        out.append(Decision(row["participant"].strip(), row["night"].strip(), row["source"].strip().lower(),
                            row["decision"].strip().lower(), (row.get("reason") or "").strip(),
                            (row.get("decided_at") or "").strip(), (row.get("reviewer") or "").strip()))
    return out


def _line_problem(row: dict) -> str | None:
    """Why one line of the review file cannot be applied, or None."""
    if None in row:
        return "more fields than the header"
    if any(row.get(c) is None for c in REVIEW_COLUMNS[:4]):
        return "fewer fields than the header"
    if not row["participant"].strip():
        return "no participant"
    decision, source, night = (row["decision"].strip().lower(), row["source"].strip().lower(), row["night"].strip())
    if decision not in DECISIONS:
        return f"decision {_short(decision)} is not one of {', '.join(DECISIONS)}"
    if source not in SOURCES:
        return f"source {_short(source)} is not one of {', '.join(SOURCES)}"
    try:
        dt.date.fromisoformat(night)
    except ValueError:
        return f"night {_short(night)} is not an ISO date such as 2026-10-31"
    return None


def _short(text: str, limit: int = 30) -> str:
    """A value quoted in a message, cut short (a message never carries a long piece of a file)."""
    return repr(text if len(text) <= limit else text[:limit] + "...")


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
    path = review_path(study)
    # The file is extended, never re-written from what could be parsed: a line sleepfuse cannot
    # read is kept for the person who wrote it.
    try:
        old = path.read_bytes().decode("utf-8-sig") if path.is_file() else ""
    except UnicodeDecodeError:
        raise ValueError(f"{REVIEW_FILE} is not UTF-8 text; mend or move it before saving a decision") from None
    buf = io.StringIO()
    w = csv.DictWriter(buf, fieldnames=REVIEW_COLUMNS, lineterminator="\n")
    if not old.strip():
        old = ""
        w.writeheader()
    else:
        first, newline, rest = old.partition("\n")
        header = next(csv.reader([first.rstrip("\r")]), [])
        if header != REVIEW_COLUMNS:
            if header == REVIEW_COLUMNS[: len(header)] and len(header) >= 5:  # an older file: columns added at the end
                pad = [""] * (len(REVIEW_COLUMNS) - len(header))
                upgraded = io.StringIO()
                out = csv.writer(upgraded, lineterminator="\n")
                out.writerow(REVIEW_COLUMNS)
                for record in csv.reader(io.StringIO(rest)):  # every record kept, a line it cannot read too
                    out.writerow(record + pad if len(record) == len(header) else record)
                old = upgraded.getvalue()
            else:
                raise ValueError(f"the first line of {REVIEW_FILE} is not the header "
                                 f"{','.join(REVIEW_COLUMNS)}; mend it before saving a decision")
        if not old.endswith(("\n", "\r")):
            old += "\n"
    w.writerow(asdict(d))
    write_text(path, old + buf.getvalue())
    return d


def apply_decisions(nights: pd.DataFrame, decisions: list[Decision], qc: QCLog | None = None) -> pd.DataFrame:
    """Honour review decisions on the night table: excluded nights get included=False and the reason in qc.

    With ``qc``, a decision for a participant or night the table does not hold gets a warning."""
    if not decisions:
        return nights
    if nights.empty:
        index: dict = {}
    else:
        nights = nights.copy()
        index = {(p, str(n), s): i
                 for i, (p, n, s) in enumerate(zip(nights["participant"], nights["night"], nights["source"]))}
    known = set(nights["participant"]) if not nights.empty else set()
    log = qc
    for key, d in effective(decisions).items():
        i = index.get(key)
        if i is None:
            if log is not None:
                what = (f"participant {_short(d.participant)} is not in this study" if d.participant not in known
                        else f"participant {d.participant} has no {d.source} night on {d.night}")
                log.warning(f"review decision ({d.decision} {d.source} {d.night}) not applied: {what}",
                           file=REVIEW_FILE, participant=d.participant if d.participant in known else "")
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
