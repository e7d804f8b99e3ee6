"""study.toml: the study's configuration, validated once, at the edge.

Every key is checked; a bad value raises ConfigError naming the key, the
value and what is allowed. Missing keys take the documented defaults, so a
study folder works with no study.toml at all.
"""

from __future__ import annotations

import re
import tomllib
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any

from sleepfuse.model.errors import ConfigError
from sleepfuse.model.patterns import MAX_STEM, glob_problem, regex_problem
from sleepfuse.model.clock import machine_timezone, zone

LOA_CI_CHOICES = ("exact", "approximate")  # as sleepfuse/fusion/limits.py
ACTIGRAPHY_ALGORITHMS = ("cole-kripke", "sadeh")
# Cole–Kripke 1992 1-min coefficient sets (see sleepfuse/scoring/actigraphy.py).
COLE_KRIPKE_SETS = ("1min-p0.001", "1min-p0.00001")
WEBSTER_ORDERS = ("sequential", "parallel")
NONWEAR_RULES = ("auto", "column", "choi", "none")
STAGE_TARGETS = ("W", "N1", "N2", "N3", "R", "unscored")
ACTIGRAPHY_COLUMN_KEYS = ("timestamp", "date", "time", "counts", "off_wrist", "marker")
DATE_ORDERS = ("day-first", "month-first")  # for dates such as 03/04/2026 that the file's values leave open
DIARY_COLUMN_KEYS = (
    "participant",
    "night",
    "bedtime",
    "tried_to_sleep",
    "sol_min",
    "nwak",
    "waso_min",
    "final_awakening",
    "out_of_bed",
    "quality",
)


@dataclass
class StudySection:
    name: str = ""
    timezone: str = ""
    timezone_from_machine: bool = False
    participant_pattern: str = ""  # regex with one group (or named group "participant")
    participants: list[str] = field(default_factory=list)  # if given, files of other participants are reported and skipped
    date_order: str = ""  # "" = settled by each file's values; else day-first / month-first


@dataclass
class FilesSection:
    psg: str = "psg/*.edf"
    actigraphy: str = "actigraphy/*.csv"
    diary: str = "diary/*.csv"


@dataclass
class PsgSection:
    epoch_s: float = 30.0
    labels: dict[str, str] = field(default_factory=dict)  # extra label -> W/N1/N2/N3/R/unscored
    signal_label: str = ""  # name of an ordinary signal that holds a hypnogram, "" = auto
    signal_codes: dict[str, str] = field(default_factory=dict)  # extra integer code -> target


@dataclass
class ActigraphySection:
    """[actigraphy]; ``scale_for(algorithm)`` is the count scale that algorithm uses."""

    columns: dict[str, str] = field(default_factory=dict)  # timestamp/counts/off_wrist/marker -> CSV name
    algorithm: str = "cole-kripke"
    coefficients: str = "1min-p0.001"
    count_scale: float = 1.0  # multiply device counts by this before scoring (both algorithms, unless set below)
    cole_kripke_scale: float = 0.0  # Cole–Kripke's own count scale; 0 = count_scale
    sadeh_scale: float = 0.0  # Sadeh's own count scale; 0 = count_scale
    webster: bool = True
    webster_order: str = "sequential"  # rules 4-5 judge the runs left by rules 1-3 ("parallel": the original runs)
    nonwear: str = "auto"  # auto: column if present, else Choi
    sadeh_cap: float = 300.0
    # counts per MINUTE above this are implausible (read as missing); per epoch the ceiling is scaled
    # to the epoch length. 16-bit epoch counters stop at 65 535 (from memory); 100 000 leaves headroom.
    max_count_per_min: float = 100_000.0

    def scale_for(self, algorithm: str) -> float:
        """The count scale of ``algorithm``: its own key when set (> 0), else the shared count_scale."""
        own = self.cole_kripke_scale if algorithm == "cole-kripke" else self.sadeh_scale
        return own if own > 0 else self.count_scale


@dataclass
class DiarySection:
    columns: dict[str, str] = field(default_factory=dict)
    quality_scale: str = "as entered"
    sheet: str = ""  # workbook diaries: the sheet to read ("" = the one with the diary's columns)


@dataclass
class ScoringSection:
    lps_run_min: float = 10.0  # latency to persistent sleep: run length, minutes
    min_wake_bout_min: float = 0.0  # wake bouts shorter than this are not counted in nwak
    max_invalid_pct: float = 50.0  # a night whose window is more than this % unscored/off-wrist is not included
    max_missing_pct: float = 10.0  # a night whose window is more than this % without data is not included (common practice)


@dataclass
class AgreementSection:
    clock_offset_max_min: float = 30.0
    clock_offset_flag_min: float = 5.0
    clock_offset_flag_kappa_gain: float = 0.05  # ... and only if shifting raises kappa by at least this much
    loa_ci: str = "exact"  # CIs of single-level limits: exact (Carkeet 2015) or approximate (Bland & Altman 1986)
    bootstrap_replicates: int = 1000  # B of the participant-level bootstrap (nested nights)
    bootstrap_seed: int = 20261205  # seed of that bootstrap: a run repeats exactly

    def table_options(self) -> dict[str, Any]:
        """Keyword arguments of ``fusion.pairs.agreement_table`` (the same for batch and the terminal app)."""
        return {"loa_ci": self.loa_ci, "replicates": self.bootstrap_replicates, "seed": self.bootstrap_seed}


@dataclass
class StudyConfig:
    root: Path
    study: StudySection = field(default_factory=StudySection)
    files: FilesSection = field(default_factory=FilesSection)
    psg: PsgSection = field(default_factory=PsgSection)
    actigraphy: ActigraphySection = field(default_factory=ActigraphySection)
    diary: DiarySection = field(default_factory=DiarySection)
    scoring: ScoringSection = field(default_factory=ScoringSection)
    agreement: AgreementSection = field(default_factory=AgreementSection)
    source: Path | None = None  # the study.toml read, if any

    @property
    def timezone(self) -> str:
        return self.study.timezone

    def participant_of(self, path: Path) -> str | None:
        """Participant ID from a file name: the part before the first '_', or the regex group."""
        stem = path.stem[:MAX_STEM]  # bounded: matching time never grows with a pathological name
        if self.study.participant_pattern:
            m = re.search(self.study.participant_pattern, stem)
            if not m:
                return None
            if "participant" in m.groupdict():
                return m.group("participant")
            return m.group(1) if m.groups() else m.group(0)
        return stem.split("_", 1)[0] or None

    def to_dict(self) -> dict[str, Any]:
        """The full effective configuration (for provenance.json)."""
        d = asdict(self)
        d["root"] = str(self.root)
        d["source"] = str(self.source) if self.source else None
        return d


SECTIONS = _SECTIONS = {
    "study": StudySection,
    "files": FilesSection,
    "psg": PsgSection,
    "actigraphy": ActigraphySection,
    "diary": DiarySection,
    "scoring": ScoringSection,
    "agreement": AgreementSection,
}


def _fail(key: str, value: object, allowed: str, path: Path | None) -> None:
    raise ConfigError(key, value, allowed, path)


def _check_type(key: str, value: object, default: object, path: Path | None) -> object:
    if isinstance(default, bool):
        if not isinstance(value, bool):
            _fail(key, value, "true or false", path)
        return value
    if isinstance(default, int):
        if isinstance(value, bool) or not isinstance(value, int):
            _fail(key, value, "a whole number", path)
        return value
    if isinstance(default, float):
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            _fail(key, value, "a number", path)
        return float(value)
    if isinstance(default, str):
        if not isinstance(value, str):
            _fail(key, value, "a string", path)
        return value
    if isinstance(default, list):
        if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
            _fail(key, value, "a list of strings", path)
        return list(value)
    if isinstance(default, dict):
        if not isinstance(value, dict) or not all(isinstance(v, str) for v in value.values()):
            _fail(key, value, "a table of strings", path)
        return {str(k): v for k, v in value.items()}
    return value


def _choice(key: str, value: str, allowed: tuple[str, ...], path: Path | None) -> None:
    if value not in allowed:
        _fail(key, value, ", ".join(allowed), path)


def build_config(root: str | Path, data: dict[str, Any] | None = None, source: Path | None = None) -> StudyConfig:
    """Validate a parsed study.toml mapping and return the effective configuration."""
    root = Path(root)
    data = data or {}
    cfg = StudyConfig(root=root, source=source)
    for section, value in data.items():
        if section not in _SECTIONS:
            _fail(section, "[...]", "sections " + ", ".join(_SECTIONS), source)
        if not isinstance(value, dict):
            _fail(section, value, "a [table]", source)
        target = getattr(cfg, section)
        for key, item in value.items():
            full = f"{section}.{key}"
            if key == "timezone_from_machine" or key not in vars(target):
                allowed = [k for k in vars(target) if k != "timezone_from_machine"]
                _fail(full, item, "keys " + ", ".join(allowed), source)
            setattr(target, key, _check_type(full, item, getattr(target, key), source))

    st = cfg.study
    if st.timezone:
        try:
            zone(st.timezone)
        except ValueError:
            _fail("study.timezone", st.timezone, "an IANA zone name such as 'Europe/Berlin'", source)
    else:
        st.timezone = machine_timezone()
        st.timezone_from_machine = True
    if not st.name:
        st.name = root.resolve().name
    if st.participant_pattern:
        problem = regex_problem(st.participant_pattern)
        if problem:
            _fail("study.participant_pattern", st.participant_pattern, problem, source)
    for name, pattern in asdict(cfg.files).items():  # every [files] pattern: relative, inside the study
        problem = glob_problem(pattern) if isinstance(pattern, str) else None
        if problem:
            _fail(f"files.{name}", pattern, problem, source)

    if st.date_order:
        _choice("study.date_order", st.date_order, DATE_ORDERS, source)
    if cfg.psg.epoch_s <= 0:
        _fail("psg.epoch_s", cfg.psg.epoch_s, "a positive number of seconds", source)
    for label, tgt in cfg.psg.labels.items():
        _choice(f"psg.labels.{label!s}", tgt, STAGE_TARGETS, source)
    for code, tgt in cfg.psg.signal_codes.items():
        try:
            int(code)
        except ValueError:
            _fail("psg.signal_codes", code, "integer codes as keys, e.g. \"5\" = \"R\"", source)
        _choice(f"psg.signal_codes.{code}", tgt, STAGE_TARGETS, source)

    act = cfg.actigraphy
    for k in act.columns:
        _choice("actigraphy.columns", k, ACTIGRAPHY_COLUMN_KEYS, source)
    _choice("actigraphy.algorithm", act.algorithm, ACTIGRAPHY_ALGORITHMS, source)
    _choice("actigraphy.coefficients", act.coefficients, COLE_KRIPKE_SETS, source)
    _choice("actigraphy.nonwear", act.nonwear, NONWEAR_RULES, source)
    if act.count_scale <= 0:
        _fail("actigraphy.count_scale", act.count_scale, "a positive number", source)
    for key in ("cole_kripke_scale", "sadeh_scale"):
        if getattr(act, key) < 0:
            _fail(f"actigraphy.{key}", getattr(act, key), "a positive number (0 or absent: count_scale)", source)
    _choice("actigraphy.webster_order", act.webster_order, WEBSTER_ORDERS, source)
    if act.sadeh_cap <= 0:
        _fail("actigraphy.sadeh_cap", act.sadeh_cap, "a positive number", source)
    if not 0 < act.max_count_per_min < float("inf"):
        _fail("actigraphy.max_count_per_min", act.max_count_per_min, "a positive number of counts per minute", source)
    for k in cfg.diary.columns:
        _choice("diary.columns", k, DIARY_COLUMN_KEYS, source)
    if cfg.scoring.lps_run_min <= 0:
        _fail("scoring.lps_run_min", cfg.scoring.lps_run_min, "a positive number of minutes", source)
    if cfg.scoring.min_wake_bout_min < 0:
        _fail("scoring.min_wake_bout_min", cfg.scoring.min_wake_bout_min, "zero or more minutes", source)
    for key in ("max_invalid_pct", "max_missing_pct"):
        if not 0 <= getattr(cfg.scoring, key) <= 100:
            _fail(f"scoring.{key}", getattr(cfg.scoring, key), "a percentage from 0 to 100", source)
    ag = cfg.agreement
    if not 0 < ag.clock_offset_max_min <= 180:
        _fail("agreement.clock_offset_max_min", ag.clock_offset_max_min, "a number of minutes in (0, 180]", source)
    if ag.clock_offset_flag_min < 0:
        _fail("agreement.clock_offset_flag_min", ag.clock_offset_flag_min, "zero or more minutes", source)
    if not 0 <= ag.clock_offset_flag_kappa_gain <= 1:
        _fail("agreement.clock_offset_flag_kappa_gain", ag.clock_offset_flag_kappa_gain, "a number from 0 to 1", source)
    _choice("agreement.loa_ci", ag.loa_ci, LOA_CI_CHOICES, source)
    if not 100 <= ag.bootstrap_replicates <= 100_000:
        _fail("agreement.bootstrap_replicates", ag.bootstrap_replicates, "a whole number from 100 to 100000", source)
    if ag.bootstrap_seed < 0:
        _fail("agreement.bootstrap_seed", ag.bootstrap_seed, "a whole number, 0 or more", source)
    return cfg


def load_config(root: str | Path) -> StudyConfig:
    """Read ``root/study.toml`` if it exists and validate it; defaults otherwise."""
    root = Path(root)
    path = root / "study.toml"
    if not path.exists():
        return build_config(root, {}, None)
    try:
        with path.open("rb") as fh:
            data = tomllib.load(fh)
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError("study.toml", "(file)", f"valid TOML ({exc})", path) from exc
    return build_config(root, data, path)
