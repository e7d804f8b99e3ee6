"""The incremental cache: each participant's scored outcome, stored beside the study.

One SQLite file, ``<study>/.sleepfuse-cache/outcomes.sqlite``, one row per
participant. A row is used only when its key matches: SHA-256 over the
participant's input files (relative path, source, SHA-256 of the content),
the rows taken from combined diaries, the effective configuration, the
sleepfuse and library versions and the cache format. The stored outcome is
JSON with its own SHA-256, so a damaged row is detected and recomputed, never
trusted. Review decisions are applied after scoring and are not in the key.
Source files are only read, never written.
"""

from __future__ import annotations

import hashlib
import json
import os
import sqlite3
import sys
import time
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Callable, Iterable

import numpy as np

from sleepfuse import __version__
from sleepfuse.model.qc import QCEntry, QCLog, study_path
from sleepfuse.run.engine import ParticipantOutcome, hash_inputs, run_jobs

if TYPE_CHECKING:  # pragma: no cover
    from sleepfuse.model.config import StudyConfig
    from sleepfuse.run.participant import ParticipantJob

CACHE_DIR = ".sleepfuse-cache"
CACHE_FILE = "outcomes.sqlite"
CACHE_FORMAT = 7  # bump when ParticipantOutcome or its JSON form changes (5: window times in whole seconds;
#                  6: missing_min; 7: EDF header text scrubbed from bytes 8-168)
_LIBRARIES = ("numpy", "pandas", "scipy", "pyedflib")
_COMMIT_EVERY_S = 2.0


def library_versions(names: tuple[str, ...] = _LIBRARIES) -> dict[str, str]:
    """Installed versions of ``names``; by default the libraries whose arithmetic shapes the scores (part of the key).

    A library already imported gives the version of the code actually running
    (its ``__version__``, the same text as its installed metadata); others are
    looked up in the installed metadata (a scan of the search path: ~30 ms the
    first time, so only when needed)."""
    out = {}
    for name in names:
        version = getattr(sys.modules.get(name), "__version__", None)
        if isinstance(version, str) and version:
            out[name] = version
            continue
        import importlib.metadata as md

        try:
            out[name] = md.version(name)
        except md.PackageNotFoundError:
            out[name] = "not installed"
    return out


def config_fingerprint(config: "StudyConfig") -> str:
    """The effective configuration as canonical JSON, without where the study lies on disk.

    ``root`` and ``source`` are left out so a study moved or mounted elsewhere
    (a cluster's shared file system) keeps its cache; the files themselves are
    identified by relative path and content.
    """
    d = config.to_dict()
    d.pop("root", None)
    d.pop("source", None)
    return json.dumps(d, sort_keys=True, default=str)


def participant_key(config_json: str, job: "ParticipantJob", inputs: Iterable[dict], libraries: dict[str, str]) -> str:
    """SHA-256 (hex) that names one participant's outcome: files, diary rows, configuration, versions."""
    files = sorted((i["file"], i["source"], i["sha256"]) for i in inputs)
    payload = {
        "format": CACHE_FORMAT,
        "sleepfuse": __version__,
        "libraries": libraries,
        "participant": job.participant,
        "files": files,
        "combined_diary": [repr(e) for e in job.extra_diary],
        "configuration": config_json,
    }
    return hashlib.sha256(json.dumps(payload, sort_keys=True).encode("utf-8")).hexdigest()


def _plain(value):
    """JSON-safe form of numpy scalars (NaN stays NaN: Python's JSON writes it as NaN)."""
    if isinstance(value, np.bool_):
        return bool(value)
    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, np.floating):
        return float(value)
    raise TypeError(f"cannot cache a value of type {type(value).__name__}")


_QC_FIELDS = ("file", "participant", "night", "severity", "message")


def encode_outcome(outcome: "ParticipantOutcome") -> bytes:
    """The outcome's scores as JSON bytes (inputs are re-read each run and not stored).

    Night rows that share one key order (all of them, from ``score_participant``)
    are stored as a column list and value lists, so the keys are written once;
    QC entries as lists in ``_QC_FIELDS`` order. ``decode_outcome`` rebuilds the
    same dicts and entries (tests/test_cache.py)."""
    rows = outcome.rows
    columns = list(rows[0]) if rows else []
    if all(list(r) == columns for r in rows):
        table = {"columns": columns, "values": [list(r.values()) for r in rows]}
    else:
        table = {"rows": rows}
    data = {
        "participant": outcome.participant,
        **table,
        "rhythm": outcome.rhythm,
        "epoch_rows": outcome.epoch_rows,
        "qc": [[e.file, e.participant, e.night, e.severity, e.message] for e in outcome.qc],
    }
    return json.dumps(data, default=_plain, allow_nan=True, separators=(",", ":")).encode("utf-8")


def decode_outcome(blob: bytes) -> "ParticipantOutcome":
    d = json.loads(blob.decode("utf-8"))
    if "rows" in d:
        rows = d["rows"]
    else:
        columns = d["columns"]
        rows = [dict(zip(columns, values)) for values in d["values"]]
    return ParticipantOutcome(
        participant=d["participant"], rows=rows, rhythm=d["rhythm"], epoch_rows=d["epoch_rows"],
        qc=[QCEntry(*e) for e in d["qc"]],
    )


def _why(exc: BaseException) -> str:
    """A short reason for a QC note (never a file's content)."""
    text = str(exc).splitlines()[0] if str(exc) else ""
    return f"{type(exc).__name__}: {text[:80]}" if text else type(exc).__name__


class CacheUnavailable(Exception):
    """The cache cannot be opened or written (read-only study folder, locked file...)."""


class OutcomeCache:
    """SQLite store of participant outcomes; every lookup verifies key and checksum."""

    def __init__(self, path: Path, conn: sqlite3.Connection):
        self.path = path
        self._conn = conn
        self._last_commit = time.monotonic()
        self.notes: list[str] = []  # what was found wrong with the store itself (reported as QC info)

    @classmethod
    def open(cls, study_root: str | Path) -> "OutcomeCache":
        """Open (or create) the study's cache; a file that cannot be opened or read is set aside
        (renamed, never deleted) and a new one started."""
        folder = Path(study_root) / CACHE_DIR
        path = folder / CACHE_FILE
        try:
            folder.mkdir(exist_ok=True)
        except OSError as exc:
            raise CacheUnavailable(f"cannot create {folder} ({exc.strerror or exc})") from None
        if not os.access(folder, os.W_OK):  # read-only study folder: not the file's fault
            raise CacheUnavailable(f"cannot write in {folder}")
        notes = []
        try:
            conn = cls._connect(path)
        except Exception as exc:  # damaged, overwritten, undecodable text...: keep it, start afresh
            if isinstance(exc, sqlite3.OperationalError) and "locked" in str(exc):
                raise CacheUnavailable(f"cannot open {path} ({exc})") from None  # another run holds it
            aside = cls._set_aside(path)
            try:
                conn = cls._connect(path)
            except Exception as exc2:
                raise CacheUnavailable(f"the cache file {path} cannot be opened or replaced ({_why(exc2)})") from None
            notes.append(f"cache file could not be read ({_why(exc)}); moved to {aside.name} "
                         f"and every participant recomputed")
        cache = cls(path, conn)
        cache.notes += notes
        return cache

    @staticmethod
    def _set_aside(path: Path) -> Path:
        """Rename a damaged cache file (and its journal) out of the way; raises CacheUnavailable if impossible."""
        aside = path.with_name(f"{CACHE_FILE}.damaged-{time.strftime('%Y%m%dT%H%M%S')}-{os.getpid()}")
        try:
            if path.exists():
                path.replace(aside)
            for suffix in ("-journal", "-wal", "-shm"):
                extra = path.with_name(path.name + suffix)
                if extra.exists():
                    extra.replace(aside.with_name(aside.name + suffix))
        except OSError as exc:
            raise CacheUnavailable(f"the cache file {path} is damaged and cannot be set aside ({exc})") from None
        return aside

    def _reset(self, exc: BaseException) -> None:
        """The open file failed while being read: set it aside and continue with a new, empty one."""
        try:
            self._conn.close()
        except Exception:
            pass
        aside = self._set_aside(self.path)
        self._conn = self._connect(self.path)
        self.notes.append(f"cache file could not be read ({_why(exc)}); moved to {aside.name} "
                          f"and the participants in it recomputed")

    @staticmethod
    def _connect(path: Path) -> sqlite3.Connection:
        conn = sqlite3.connect(path, timeout=30.0)
        try:
            conn.execute("PRAGMA synchronous=NORMAL")
            conn.execute(
                "CREATE TABLE IF NOT EXISTS outcomes (participant TEXT PRIMARY KEY, key TEXT NOT NULL, "
                "checksum TEXT NOT NULL, blob BLOB NOT NULL, stored TEXT NOT NULL)"
            )
            conn.execute("CREATE TABLE IF NOT EXISTS meta (name TEXT PRIMARY KEY, value TEXT NOT NULL)")
            row = conn.execute("SELECT value FROM meta WHERE name = 'format'").fetchone()
            if row is None or row[0] != str(CACHE_FORMAT):
                with conn:
                    conn.execute("DELETE FROM outcomes")
                    conn.execute("INSERT OR REPLACE INTO meta VALUES ('format', ?)", (str(CACHE_FORMAT),))
            conn.execute("SELECT count(*) FROM outcomes").fetchone()  # touches the pages: detects damage now
        except sqlite3.DatabaseError:
            conn.close()
            raise
        return conn

    def get(self, participant: str, key: str) -> "tuple[ParticipantOutcome | None, str]":
        """The stored outcome if its key and checksum match; else (None, why) with why '' for a plain miss.

        A store that cannot be read at all is set aside and replaced by an empty one (a note in ``notes``)."""
        try:
            row = self._conn.execute(
                "SELECT key, checksum, blob FROM outcomes WHERE participant = ?", (participant,)
            ).fetchone()
            if row is None:
                return None, ""
            stored_key, checksum, blob = row
            if stored_key != key:
                return None, ""  # inputs, configuration or versions changed: stale, recompute
            blob = bytes(blob)
        except Exception as exc:  # damaged pages, undecodable text
            self._reset(exc)
            return None, f"cache unreadable ({_why(exc)}); recomputed"
        if hashlib.sha256(blob).hexdigest() != checksum:
            return None, "cache entry damaged (checksum mismatch); recomputed"
        try:
            outcome = decode_outcome(blob)
        except Exception as exc:
            return None, f"cache entry unreadable ({type(exc).__name__}); recomputed"
        if outcome.participant != participant:
            return None, "cache entry belongs to another participant; recomputed"
        return outcome, ""

    def put(self, key: str, outcome: "ParticipantOutcome") -> None:
        """Store one outcome (committed in small groups; a crash keeps what was committed)."""
        blob = encode_outcome(outcome)
        stored = time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime())
        self._conn.execute(
            "INSERT OR REPLACE INTO outcomes VALUES (?, ?, ?, ?, ?)",
            (outcome.participant, key, hashlib.sha256(blob).hexdigest(), blob, stored),
        )
        if time.monotonic() - self._last_commit > _COMMIT_EVERY_S:
            self.commit()

    def participants(self) -> set[str]:
        """Participants with a stored entry (whether or not it is still valid)."""
        try:
            return {row[0] for row in self._conn.execute("SELECT participant FROM outcomes")}
        except Exception as exc:  # damaged pages, undecodable text: set the file aside, nothing is stored
            self._reset(exc)
            return set()

    def commit(self) -> None:
        self._conn.commit()
        self._last_commit = time.monotonic()

    def close(self) -> None:
        try:
            self.commit()
        finally:
            self._conn.close()


@dataclass
class CacheReport:
    """What the cache did in one run (for provenance.json and the console)."""

    used: bool
    path: str = ""
    from_cache: int = 0
    recomputed: int = 0
    reason: str = ""  # why the cache was not used


def run_cached(config: "StudyConfig", jobs: "list[ParticipantJob]", qc: QCLog,
               progress: Callable[[str, int, int], None] | None = None, *,
               use_cache: bool = True, workers: int = 1, scheduler: str | None = None,
               pool=None, keep_detail: bool = False) -> "tuple[list[ParticipantOutcome], CacheReport]":
    """Outcomes of every job: unchanged participants from the cache, the rest computed and stored
    (in ``pool``, a process pool, when given). Batch and the terminal app's session both run their
    participants through here. An outcome that is not ``complete`` is never stored. Outcomes from the
    cache carry no ``detail``; computed ones carry it when ``keep_detail`` (a run in this process)."""
    report = CacheReport(used=False, reason="--no-cache" if not use_cache else "")
    cache = None
    if use_cache:
        try:
            cache = OutcomeCache.open(config.root)
        except CacheUnavailable as exc:
            report.reason = str(exc)
            qc.info(f"incremental cache not used: {exc}; every participant computed", file=CACHE_DIR)
    if cache is None:  # each worker checksums its own participant's files (in parallel, no cache key needed)
        outcomes = run_jobs(config, jobs, workers, progress, scheduler=scheduler, pool=pool,
                            keep_detail=keep_detail)
        report.recomputed = len(outcomes)
        return outcomes, report

    # A participant with no stored entry is recomputed whatever its checksums: its worker
    # checksums its files (in parallel) and the key is made from them when it is stored.
    stored = cache.participants()
    known = [k for k, job in enumerate(jobs) if job.participant in stored]
    inputs: list[list[dict] | None] = [None] * len(jobs)
    for k, found in zip(known, hash_inputs(config, [jobs[k] for k in known], workers)):
        inputs[k] = found

    report.used, report.path = True, study_path(cache.path, config.root)
    cfg, libs = config_fingerprint(config), library_versions()
    keys: list[str | None] = []
    hits: list = []
    todo: list[int] = []
    for k, job in enumerate(jobs):
        if inputs[k] is None:  # nothing stored for this participant: a miss, keyed when stored
            keys.append(None)
            todo.append(k)
            continue
        ok = all(i.get("sha256") for i in inputs[k])  # a file that cannot be hashed is never cached
        key = participant_key(cfg, job, inputs[k], libs) if ok else None
        keys.append(key)
        found, why = cache.get(job.participant, key) if key else (None, "")
        if why:
            qc.info(why, file=report.path, participant=job.participant)
        if found is None:
            todo.append(k)
        else:
            found.inputs = inputs[k]
            hits.append(found)
    for note in cache.notes:  # the store set aside on opening or while reading it
        qc.warning(note, file=report.path)
    if progress and hits:
        progress("", len(hits), len(jobs))

    todo_jobs = [jobs[k] for k in todo]
    broken: list[str] = []

    def store(j: int, outcome: "ParticipantOutcome") -> None:
        k = todo[j]
        key = keys[k]
        if inputs[k] is None and all(i.get("sha256") for i in outcome.inputs):  # checksummed by its worker
            key = participant_key(cfg, jobs[k], outcome.inputs, libs)
        if key is None or broken or not outcome.complete:
            return
        try:
            cache.put(key, outcome)
        except Exception as exc:  # a full disk or locked file costs the cache, never the run
            broken.append(f"{type(exc).__name__}: {exc}")

    try:
        computed = run_jobs(config, todo_jobs, workers, progress, inputs=[inputs[k] for k in todo],
                            scheduler=scheduler, on_done=store, done_before=len(hits), total=len(jobs),
                            pool=pool, keep_detail=keep_detail)
    finally:
        try:
            cache.close()
        except Exception as exc:
            broken.append(f"{type(exc).__name__}: {exc}")
    if broken:
        qc.info(f"incremental cache could not be updated ({broken[0]}); the outputs are complete", file=report.path)
    report.from_cache, report.recomputed = len(hits), len(computed)
    return sorted(hits + computed, key=lambda o: o.participant), report
