"""``sleepfuse inspect``: what the readers detect in each file of a study, and a proposed study.toml.

Every file is read with the same readers as ``batch`` (so what is printed is
what will be used); nothing is written here. ``propose_toml`` turns the
findings into a study.toml a research assistant can read and keep.
"""

from __future__ import annotations

import datetime as dt
import textwrap
from dataclasses import dataclass, field
from pathlib import Path

from sleepfuse.model.config import SECTIONS, StudyConfig, load_config
from sleepfuse.model.errors import ReadError
from sleepfuse.model.qc import QCLog, study_path
from sleepfuse.model.records import ActigraphyRecord, Diary, Hypnogram, actigraphy_nights, hypnogram_night
from .folder import discover, read_actigraphy_file, read_diary_file, read_hypnogram_file


@dataclass
class FileReport:
    """One file: what it was read as, or why it was not."""

    file: str
    source: str
    participant: str
    detected: dict[str, str] = field(default_factory=dict)
    nights: list[tuple[str, dt.date]] = field(default_factory=list)  # (participant, night) read
    error: str = ""
    warnings: int = 0

    @property
    def needs_date_order(self) -> bool:
        return "date_order" in self.error


@dataclass
class Survey:
    config: StudyConfig
    files: list[FileReport]
    notes: list[str]

    def nights_per_instrument(self) -> dict[str, dict[str, int]]:
        """participant -> source -> number of distinct nights read."""
        out: dict[str, dict[str, set]] = {}
        for f in self.files:
            for who, night in f.nights:
                out.setdefault(who, {}).setdefault(f.source, set()).add(night)
        return {p: {s: len(n) for s, n in sorted(by.items())} for p, by in sorted(out.items())}


def survey(root: str | Path, config: StudyConfig | None = None) -> Survey:
    """Read every file of the study at ``root`` and report what each reader detected."""
    root = Path(root)
    config = config if config is not None else load_config(root)
    qc = QCLog()
    found = discover(config, qc)
    notes = [e.message for e in qc if e.severity != "info"]
    if config.study.timezone_from_machine:
        notes.insert(0, f"no time zone in study.toml: this machine's zone {config.timezone} is assumed")
    owner = {p: (pid, src) for pid, by in found.by_participant.items() for src, paths in by.items() for p in paths}
    owner.update({p: ("", "diary") for p in found.combined_diaries})
    reports = []
    for path in found.all_files:
        pid, source = owner.get(path, ("", _source_of(path, root)))
        report = FileReport(study_path(path, root), source, pid)
        reports.append(report)
        if path not in owner:
            report.error = "not assigned to a participant (see the notes)"
            continue
        try:
            record = _read(config, source, path, pid or None)
        except ReadError as exc:
            report.error = exc.reason
            continue
        report.detected = dict(record.detected)
        report.warnings = sum(1 for p in record.problems if p.severity != "info")
        report.detected.update(_span(record))
        report.nights = _nights(record, pid)
    return Survey(config, reports, notes)


def _source_of(path: Path, root: Path) -> str:
    parts = path.relative_to(root).parts if path.is_relative_to(root) else (path.parent.name,)
    return parts[0] if parts else ""


def _read(config: StudyConfig, source: str, path: Path, participant: str | None):
    if source == "psg":
        return read_hypnogram_file(config, path)
    if source == "actigraphy":
        return read_actigraphy_file(config, path)
    return read_diary_file(config, path, participant)


def _span(record) -> dict[str, str]:
    if isinstance(record, (Hypnogram, ActigraphyRecord)):
        out = {"time span": f"{record.start:%Y-%m-%d %H:%M} to {record.end:%Y-%m-%d %H:%M} ({record.start:%Z})"}
        if isinstance(record, Hypnogram):
            out["epoch length"] = f"{record.epoch_s:g} s"
            out["lights"] = record.detected.get("lights rows") or ("off and on" if record.lights_off is not None and record.lights_on is not None else
                             "missing: first to last scored epoch")
        else:
            out["epoch length"] = f"{record.epoch_s} s"
        return out
    if isinstance(record, Diary) and record.entries:
        nights = sorted(e.night for e in record.entries)
        people = sorted({e.participant for e in record.entries})
        out = {"time span": f"nights {nights[0]} to {nights[-1]}"}
        if len(people) > 1:
            out["participants"] = ", ".join(people)
        return out
    return {}


def _nights(record, participant: str) -> list[tuple[str, dt.date]]:
    if isinstance(record, Hypnogram):
        return [(participant, hypnogram_night(record))]
    if isinstance(record, ActigraphyRecord):
        return [(participant, n) for n in actigraphy_nights(record)]
    return [(e.participant, e.night) for e in record.entries]


def _toml_value(value) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (int, float)):
        return f"{value:g}" if isinstance(value, float) else str(value)
    if isinstance(value, list):
        return "[" + ", ".join(_toml_value(v) for v in value) + "]"
    if isinstance(value, dict):
        return "{" + ", ".join(f"{_toml_value(str(k))} = {_toml_value(v)}" for k, v in value.items()) + "}"
    return '"' + str(value).replace("\\", "\\\\").replace('"', '\\"') + '"'


def propose_toml(s: Survey) -> str:
    """A study.toml for the study surveyed: the time zone to check, every setting of the current
    configuration that differs from the defaults (so --force loses nothing), and a note where a
    file needs a setting only a person can give (the date order)."""
    cfg = s.config
    lines = [
        "# study.toml proposed by 'sleepfuse inspect': check every line, then keep it.",
        "# sleepfuse is for research; it does not diagnose.",
        "[study]",
        f"name = {_toml_value(cfg.study.name)}",
        f"timezone = {_toml_value(cfg.timezone)}"
        + ("   # this machine's zone: set the zone of the devices' clocks" if cfg.study.timezone_from_machine
           else "   # IANA zone of the devices' clocks"),
    ]
    defaults = StudyConfig(root=cfg.root)
    for section in SECTIONS:
        now, default = getattr(cfg, section), getattr(defaults, section)
        keys = [k for k in vars(now) if k not in ("name", "timezone", "timezone_from_machine")
                and getattr(now, k) != getattr(default, k)]
        if section != "study" and keys:
            lines += ["", f"[{section}]"]
        lines += [f"{k} = {_toml_value(getattr(now, k))}" for k in keys]
        if section == "study" and not cfg.study.date_order and any(f.needs_date_order for f in s.files):
            unsettled = ", ".join(f.file for f in s.files if f.needs_date_order)
            lines += [f"# The dates of {unsettled} fit both day-first and month-first: say which, e.g.",
                      '# date_order = "day-first"   # or "month-first"']
    return "\n".join(lines) + "\n"


def describe(s: Survey) -> str:
    """The survey as text for the console (80 columns, no colour needed)."""
    out = []
    for f in s.files:
        who = f" ({f.participant})" if f.participant else ""
        out.append(f"{f.file} [{f.source}]{who}")
        if f.error:
            out += textwrap.wrap(f"NOT READ: {f.error}", 78, initial_indent="  ", subsequent_indent="      ")
            continue
        for key, value in f.detected.items():
            out += textwrap.wrap(f"{key}: {value}", 78, initial_indent="  ", subsequent_indent="      ")
        out.append(f"  nights: {len(set(f.nights))}" + (f"; {f.warnings} warning(s): see 'sleepfuse check'"
                                                      if f.warnings else ""))
    table = s.nights_per_instrument()
    if table:
        out += ["", "nights per instrument:", f"  {'participant':<12} {'psg':>5} {'actigraphy':>11} {'diary':>6}"]
        for pid, by in table.items():
            out.append(f"  {pid:<12} {by.get('psg', 0):>5} {by.get('actigraphy', 0):>11} {by.get('diary', 0):>6}")
    if s.notes:
        out += ["", "notes:"] + [ln for n in s.notes for ln in textwrap.wrap(n, 78, initial_indent="  ",
                                                                            subsequent_indent="    ")]
    return "\n".join(out) + "\n"
