"""The study folder: discover files by the folder contract, read them, place them on nights.

A bad file is reported in the QC log (file, participant, night, reason) and
skipped; it never stops the rest of the study.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import os
import re
import stat
from dataclasses import dataclass
from pathlib import Path
from typing import Callable, Iterable


from sleepfuse.model.config import FilesSection, StudyConfig, load_config
from sleepfuse.model.errors import ReadError
from sleepfuse.model.qc import QCLog, study_path
from sleepfuse.model.records import (  # noqa: F401  (SOURCES and the night rules re-exported)
    SOURCES,
    ActigraphyRecord,
    DiaryEntry,
    Hypnogram,
    ParticipantRecords,
    Problem,
    actigraphy_nights,
    hypnogram_night,
)
from sleepfuse.model.clock import night_of



@dataclass
class Study:
    config: StudyConfig
    participants: dict[str, ParticipantRecords]
    qc: QCLog
    files: list[Path]  # every input file found (read or not)

    @property
    def participant_ids(self) -> list[str]:
        return sorted(self.participants)


@dataclass
class StudyFiles:
    """Files found by the folder contract, grouped by participant and source."""

    by_participant: dict[str, dict[str, list[Path]]]
    combined_diaries: list[Path]  # diary files without a participant in their name
    all_files: list[Path]


def sha256_of(path: Path, chunk: int = 1 << 20) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(chunk), b""):
            h.update(block)
    return h.hexdigest()


def discover(config: StudyConfig, qc: QCLog) -> StudyFiles:
    """Find the study's files by the folder contract and assign each to a participant."""
    if config.study.timezone_from_machine:
        qc.info(f"study.toml gives no [study] timezone; using this machine's zone {config.timezone}", file="study.toml")
    root = config.root
    patterns = {"psg": config.files.psg, "actigraphy": config.files.actigraphy, "diary": config.files.diary}
    by_participant: dict[str, dict[str, list[Path]]] = {}
    combined: list[Path] = []
    all_files: list[Path] = []
    allowed = set(config.study.participants)
    real: dict[Path, Path] = {}  # resolved folders
    for source, pattern in patterns.items():
        for path in _matches(root, source, pattern, qc):
            rel = study_path(path, root)
            if not _readable_input(path, root, rel, qc, real):
                continue
            all_files.append(path)
            participant = config.participant_of(path)
            if source == "diary" and (participant is None or ("_" not in path.stem and not config.study.participant_pattern)):
                combined.append(path)
                continue
            if participant is None:
                qc.error(
                    f"cannot tell the participant from the file name; expected <participant>_<anything>"
                    f"{' matching ' + repr(config.study.participant_pattern) if config.study.participant_pattern else ''}",
                    file=rel,
                )
                continue
            unsafe = unsafe_id(participant)
            if unsafe:
                qc.error(f"participant ID from the file name {unsafe}; file skipped (rename the file)",
                         file=safe_cell(rel))
                continue
            if allowed and participant not in allowed:
                qc.error(
                    f"participant {participant!r} is not in [study] participants of study.toml; file skipped",
                    file=rel,
                    participant=participant,
                )
                continue
            by_participant.setdefault(participant, {s: [] for s in SOURCES})[source].append(path)
    if not all_files:
        qc.error(
            f"no input files found under {root} (looked for {', '.join(patterns.values())})",
            file=str(root),
        )
    return StudyFiles(by_participant, combined, all_files)


# With the default patterns, each folder also takes the other file types a lab saves (any case).
KNOWN_SUFFIXES = {
    "psg": (".edf", ".bdf", ".csv", ".tsv", ".txt"),
    "actigraphy": (".csv", ".tsv", ".txt"),
    "diary": (".csv", ".tsv", ".txt", ".xlsx", ".xlsm", ".ods"),
}
TEXT_HYPNOGRAM_SUFFIXES = (".csv", ".tsv", ".txt")


def _matching(root: Path, source: str, pattern: str) -> list[Path]:
    """Files of ``source``: the pattern's, or with the default pattern every known file type in its folder."""
    if pattern != getattr(FilesSection(), source):
        return sorted(root.glob(pattern))
    return sorted(p for p in root.glob(f"{source}/*") if p.suffix.lower() in KNOWN_SUFFIXES[source]
                  and not p.name.startswith((".", "~$")))


FORMULA_START = ("=", "+", "-", "@", "\t", "\r")  # a spreadsheet runs a cell starting so as a formula (OWASP CSV injection)


def unsafe_id(participant: str) -> str | None:
    """Why a participant ID cannot be written into a table, or None: IDs never start a formula."""
    if participant.startswith(FORMULA_START):
        return (f"starts with {participant[:1]!r}, which a spreadsheet would run as a formula "
                f"(IDs must not begin with =, +, -, @, a tab or a carriage return)")
    return None


def safe_cell(text: str) -> str:
    """A file name for a QC line that never starts a formula (a leading './')."""
    return f"./{text}" if text.startswith(FORMULA_START) else text


def _matches(root: Path, source: str, pattern: str, qc: QCLog) -> list[Path]:
    """The paths a [files] pattern matches (any kind of entry); a pattern glob cannot use is a QC error."""
    try:
        return _matching(root, source, pattern)
    except (NotImplementedError, ValueError, OSError) as exc:  # checked at load; a config built in code may not be
        qc.error(f"file pattern {pattern!r} cannot be used ({exc}); give a pattern relative to the study folder",
                 file="study.toml")
        return []


def _readable_input(path: Path, root: Path, rel: str, qc: QCLog, real: dict[Path, Path]) -> bool:
    """True for a regular file (possibly through a link); every other match gets a QC line and is skipped.

    ``real`` remembers resolved folders across calls (the study root and each
    folder of files): a plain file is inside the study when its folder is, so
    only links are resolved one by one.
    """
    try:
        mode = os.lstat(path).st_mode
        link = stat.S_ISLNK(mode)
        if link:
            if not path.exists():
                qc.error("broken link: the file it points to does not exist; skipped", file=safe_cell(rel))
                return False
            mode = os.stat(path).st_mode
        if stat.S_ISDIR(mode):
            qc.warning("a folder, not a file, matches the file pattern; skipped", file=safe_cell(rel))
            return False
        if not stat.S_ISREG(mode):  # never opened: a pipe would block, a device never ends
            qc.error("not a regular file (a pipe, socket or device); skipped", file=safe_cell(rel))
            return False
        if link:
            target = path.resolve()
        else:
            if path.parent not in real:
                real[path.parent] = path.parent.resolve()
            target = real[path.parent] / path.name
        if root not in real:
            real[root] = root.resolve()
    except OSError as exc:
        qc.error(f"cannot be examined ({exc.strerror or type(exc).__name__}); skipped", file=safe_cell(rel))
        return False
    try:
        target.relative_to(real[root])
    except ValueError:
        qc.warning("read through a link that leads outside the study folder; the study is not self-contained",
                   file=safe_cell(rel))
    return True


QUOTE_MAX, MESSAGE_MAX = 40, 400  # characters of a quoted piece of a file, of a whole message
# a quote opens after a non-word character (so the closing quote of 'a' never opens 'b')
_QUOTED = re.compile(r"(?<!\w)'(?:[^'\\\n]|\\.){%d,}'|(?<!\w)\"(?:[^\"\\\n]|\\.){%d,}\"" % (QUOTE_MAX + 1, QUOTE_MAX + 1))


def short_excerpts(message: str) -> str:
    """A reader's message with every quoted piece of file content cut to QUOTE_MAX characters
    and the whole to MESSAGE_MAX: a QC line never carries a long stretch of a file."""
    message = _QUOTED.sub(lambda m: m.group(0)[: QUOTE_MAX + 1] + "..." + m.group(0)[0], message)
    return message if len(message) <= MESSAGE_MAX else message[: MESSAGE_MAX - 3] + "..."


def _report_problems(qc: QCLog, problems: Iterable[Problem], *, file: str, participant: str) -> None:
    for p in problems:
        night = p.night if p.night is not None else (night_of(p.time) if p.time is not None else "")
        qc.add(p.severity if p.severity in ("info", "warning", "error") else "warning", short_excerpts(p.message),
               file=file, participant=p.participant or participant, night=night)


def read_hypnogram_file(config: StudyConfig, path: Path) -> Hypnogram:
    if path.suffix.lower() in TEXT_HYPNOGRAM_SUFFIXES:
        from sleepfuse.readers.hypnogram_text import read_text_hypnogram

        return read_text_hypnogram(path, config.timezone, epoch_s=config.psg.epoch_s, labels=config.psg.labels,
                                   date_order=config.study.date_order)
    from sleepfuse.readers.edf import read_hypnogram

    return read_hypnogram(
        path,
        config.timezone,
        epoch_s=config.psg.epoch_s,
        labels=config.psg.labels,
        signal_label=config.psg.signal_label,
        signal_codes=config.psg.signal_codes,
    )


def read_actigraphy_file(config: StudyConfig, path: Path) -> ActigraphyRecord:
    from sleepfuse.readers.actigraphy import read_actigraphy

    return read_actigraphy(path, config.timezone, columns=config.actigraphy.columns,
                           date_order=config.study.date_order,
                           max_count_per_min=config.actigraphy.max_count_per_min)


def read_diary_file(config: StudyConfig, path: Path, participant: str | None):
    from sleepfuse.readers.diary import read_diary

    return read_diary(path, config.timezone, columns=config.diary.columns, participant=participant,
                      sheet=config.diary.sheet, date_order=config.study.date_order)


def load_participant(
    config: StudyConfig,
    participant: str,
    files: dict[str, list[Path]],
    qc: QCLog,
    extra_diary: Iterable[DiaryEntry] = (),
) -> ParticipantRecords:
    """Read one participant's files; each bad file becomes a QC error and is skipped."""
    rec = ParticipantRecords(participant)
    readers = {  # source -> (label in messages, reader, where the record goes)
        "psg": ("PSG", lambda p: read_hypnogram_file(config, p), rec.hypnograms.append),
        "actigraphy": ("actigraphy", lambda p: read_actigraphy_file(config, p), rec.actigraphy.append),
        "diary": ("diary", lambda p: read_diary_file(config, p, participant),
                  lambda d: rec.diary.extend(e for e in d.entries if e.participant == participant)),
    }
    for source, (label, read, keep) in readers.items():
        for path in files.get(source, []):
            rel = study_path(path, config.root)
            rec.files.append(path)
            try:
                record = read(path)
            except ReadError as exc:
                qc.error(f"{label} file not read: {short_excerpts(exc.reason)}", file=rel, participant=participant)
                continue
            _report_problems(qc, record.problems, file=rel, participant=participant)
            for entry in getattr(record, "entries", ()):  # diary rows name their file in every later QC line
                entry.file = rel
            if getattr(record, "sha256", ""):
                rec.digests[path] = record.sha256
            keep(record)
    rec.diary.extend(extra_diary)
    _check_duplicate_nights(rec, qc, config)
    return rec


def _check_duplicate_nights(rec: ParticipantRecords, qc: QCLog, config: StudyConfig) -> None:
    """Two PSG recordings or two diary rows on one night: keep the first, report the rest."""
    seen: dict[dt.date, Hypnogram] = {}
    kept: list[Hypnogram] = []
    for h in sorted(rec.hypnograms, key=lambda h: h.start):
        n = hypnogram_night(h)
        if n in seen:
            qc.error(
                f"second PSG recording on night {n} (first: {study_path(seen[n].path, config.root)}); this one is skipped",
                file=study_path(h.path, config.root), participant=rec.participant, night=n,
            )
            continue
        seen[n] = h
        kept.append(h)
    rec.hypnograms = kept
    seen_d: dict[dt.date, DiaryEntry] = {}
    kept_d: list[DiaryEntry] = []
    for e in rec.diary:
        if e.night in seen_d:
            qc.error(
                f"second diary row for night {e.night} (line {e.line}); the first (line {seen_d[e.night].line}"
                f"{'' if seen_d[e.night].file == e.file else ' of ' + seen_d[e.night].file}) is kept",
                file=e.file, participant=rec.participant, night=e.night,
            )
            continue
        seen_d[e.night] = e
        kept_d.append(e)
    rec.diary = sorted(kept_d, key=lambda e: e.night)


def read_combined_diaries(config: StudyConfig, paths: Iterable[Path], qc: QCLog) -> dict[str, list[DiaryEntry]]:
    """Diary files holding many participants (a ``participant`` column)."""
    out: dict[str, list[DiaryEntry]] = {}
    allowed = set(config.study.participants)
    for path in paths:
        rel = study_path(path, config.root)
        try:
            d = read_diary_file(config, path, None)
        except ReadError as exc:
            qc.error(f"diary file not read: {short_excerpts(exc.reason)}", file=rel)
            continue
        _report_problems(qc, d.problems, file=rel, participant="")
        for e in d.entries:
            e.file = rel
            unsafe = unsafe_id(e.participant)
            if unsafe:
                qc.error(f"participant ID in line {e.line} {unsafe}; row skipped", file=safe_cell(rel), night=e.night)
                continue
            if allowed and e.participant not in allowed:
                qc.error(f"participant {e.participant!r} (line {e.line}) is not in [study] participants; row skipped",
                         file=rel, participant=e.participant, night=e.night)
                continue
            out.setdefault(e.participant, []).append(e)
    return out


@dataclass(frozen=True)
class ParticipantJob:
    """Everything one worker needs to process one participant."""

    participant: str
    files: dict[str, list[Path]]
    extra_diary: tuple[DiaryEntry, ...] = ()


def plan_jobs(config: StudyConfig, qc: QCLog) -> tuple[list[ParticipantJob], list[Path]]:
    """Discover the study's files and make one job per participant."""
    found = discover(config, qc)
    combined = read_combined_diaries(config, found.combined_diaries, qc)
    ids = sorted(set(found.by_participant) | set(combined))
    jobs = [
        ParticipantJob(pid, found.by_participant.get(pid, {s: [] for s in SOURCES}), tuple(combined.get(pid, ())))
        for pid in ids
    ]
    return jobs, found.all_files


def load_study(
    root: str | Path,
    *,
    config: StudyConfig | None = None,
    qc: QCLog | None = None,
    progress: Callable[[str, int, int], None] | None = None,
) -> Study:
    """Read a whole study folder. ``progress(participant, i, n)`` is called per participant."""
    root = Path(root)
    qc = qc if qc is not None else QCLog()
    config = config if config is not None else load_config(root)
    jobs, files = plan_jobs(config, qc)
    participants: dict[str, ParticipantRecords] = {}
    for i, job in enumerate(jobs):
        if progress:
            progress(job.participant, i, len(jobs))
        participants[job.participant] = load_participant(config, job.participant, job.files, qc, job.extra_diary)
    return Study(config=config, participants=participants, qc=qc, files=files)
