"""Sleep-stage label maps for PSG hypnograms: annotation texts and integer signal codes.

Labels are compared after ``normalise_label`` (lower case, no whitespace,
underscores or hyphens), so "Sleep stage W", "sleep_stage_w" and
"SleepStageW" are one label. AASM stages (Berry et al., AASM scoring manual)
and Rechtschaffen & Kales (1968) stages map as SLEEP_PARAMETERS.md says:
S1→N1, S2→N2, S3 and S4→N3, REM→R, movement time and "?"→unscored.
"""

from __future__ import annotations

import re

from sleepfuse.model.stages import Stage

# Target names used in study.toml ([psg] labels / signal_codes) -> Stage code.
TARGET_CODES: dict[str, int] = {
    "W": int(Stage.WAKE),
    "N1": int(Stage.N1),
    "N2": int(Stage.N2),
    "N3": int(Stage.N3),
    "R": int(Stage.REM),
    "unscored": int(Stage.UNSCORED),
}

_SEPARATORS = re.compile(r"[\s_\-]+")


def normalise_label(text: str) -> str:
    """Lower-case ``text`` and drop whitespace, underscores and hyphens ("Sleep stage 2" -> "sleepstage2")."""
    return _SEPARATORS.sub("", str(text)).lower()


def _labels(target: str, *spellings: str) -> dict[str, str]:
    return {normalise_label(s): target for s in spellings}


# Default label map (normalised label -> target). AASM: W, N1, N2, N3, R;
# R&K 1968: W, 1-4, REM, MT; the rest are spellings common in lab exports
# (common practice).
DEFAULT_STAGE_LABELS: dict[str, str] = {
    **_labels(
        "W", "W", "Wake", "Awake", "Wakefulness", "Stage W", "Sleep stage W", "Sleep stage wake",
        "Stage wake", "0", "Stage 0", "Sleep stage 0", "S0",
    ),
    **_labels(
        "N1", "N1", "NREM1", "NREM 1", "NREM stage 1", "S1", "Stage 1", "Stage 1 sleep", "Sleep stage 1",
        "Sleep stage N1", "Stage N1", "1",
    ),
    **_labels(
        "N2", "N2", "NREM2", "NREM 2", "NREM stage 2", "S2", "Stage 2", "Stage 2 sleep", "Sleep stage 2",
        "Sleep stage N2", "Stage N2", "2",
    ),
    **_labels(
        "N3", "N3", "NREM3", "NREM 3", "NREM stage 3", "S3", "Stage 3", "Stage 3 sleep", "Sleep stage 3",
        "Sleep stage N3", "Stage N3", "3", "N4", "NREM4", "NREM 4", "NREM stage 4", "S4", "Stage 4",
        "Stage 4 sleep", "Sleep stage 4", "Sleep stage N4", "Stage N4", "4", "SWS", "Slow wave sleep",
    ),
    **_labels(
        "R", "R", "REM", "REM sleep", "Stage R", "Stage REM", "Sleep stage R", "Sleep stage REM",
    ),
    **_labels(
        "unscored", "?", "Sleep stage ?", "Stage ?", "Unscored", "Not scored", "Sleep stage unscored",
        "Unknown", "Sleep stage unknown", "M", "MT", "Movement", "Movement time", "Sleep stage M",
        "Sleep stage MT", "Stage M", "Sleep stage movement",
    ),
}

# Integer codes of a hypnogram stored as an ordinary signal: W,1,2,3,4,R,M as
# 0..6 and 9 = unscored (common practice). 4 (R&K S4) folds into N3.
DEFAULT_SIGNAL_CODES: dict[int, str] = {
    0: "W",
    1: "N1",
    2: "N2",
    3: "N3",
    4: "N3",
    5: "R",
    6: "unscored",
    9: "unscored",
}

# Annotation texts that name events, not stages: such an annotation is never
# taken for an unknown stage even when its duration is a whole number of
# epochs (common practice; substrings of the normalised text).
_EVENT_WORDS = (
    "arousal", "apnea", "apnoea", "hypopnea", "hypopnoea", "rera", "desat", "spo2", "saturation",
    "oximetr", "spindle", "kcomplex", "limb", "plm", "legmove", "snor", "baddata", "artifact",
    "artefact", "lights", "lightsoff", "recording", "start", "end", "pause", "resume", "note",
    "comment", "position", "supine", "prone", "upright", "bruxism", "cheyne", "breath", "respirat",
    "central", "obstructive", "mixed", "brady", "tachy", "arrhythm", "asystole", "calibrat",
    "impedance", "biocal", "marker", "event", "video", "montage", "electrode", "signal", "gap",
    "disconnect", "analysis", "heart", "ecg", "ekg", "emg", "eeg", "eog", "seizure", "epilep",
    "rls", "body", "tech", "light", "spike", "alpha", "sweat", "cough", "talk",
)
_EVENT_EXACT = frozenset({"lm", "am", "ah", "oa", "ca", "ma", "hy", "ox"})
_STAGE_PREFIXES = ("sleepstage", "stage", "hypnogram")
_LIGHTS = re.compile(r"^[\W_]*lights?[\W_]*(off|out|on)(?![a-z0-9])", re.IGNORECASE)


def merged_labels(extra: dict[str, str] | None) -> dict[str, str]:
    """Default label map extended and overridden by ``extra`` (keys normalised)."""
    table = dict(DEFAULT_STAGE_LABELS)
    for label, target in (extra or {}).items():
        if target not in TARGET_CODES:
            raise ValueError(f"label {label!r} maps to {target!r}; allowed: {', '.join(TARGET_CODES)}")
        table[normalise_label(label)] = target
    return table


def stage_code(label: str, extra: dict[str, str] | None = None) -> int | None:
    """Stage code (sleepfuse.model.stages.Stage) of an annotation text, or None for an unknown label."""
    target = merged_labels(extra).get(normalise_label(label))
    return None if target is None else TARGET_CODES[target]


def merged_signal_codes(extra: dict[str, str] | None) -> dict[int, int]:
    """Integer signal code -> Stage code: DEFAULT_SIGNAL_CODES extended/overridden by ``extra``."""
    table = {code: TARGET_CODES[t] for code, t in DEFAULT_SIGNAL_CODES.items()}
    for key, target in (extra or {}).items():
        if target not in TARGET_CODES:
            raise ValueError(f"signal code {key!r} maps to {target!r}; allowed: {', '.join(TARGET_CODES)}")
        table[int(str(key).strip())] = TARGET_CODES[target]
    return table


def lights_marker(text: str) -> str | None:
    """'off' for a lights-off/lights-out marker, 'on' for lights on, else None (case-insensitive)."""
    m = _LIGHTS.match(text.strip())
    if not m:
        return None
    return "on" if m.group(1).lower() == "on" else "off"


def is_event_text(norm: str) -> bool:
    """True if a normalised annotation text names a scoring event (arousal, apnea, ...), not a stage."""
    return norm in _EVENT_EXACT or any(word in norm for word in _EVENT_WORDS)


def is_stage_like(norm: str) -> bool:
    """True if a normalised text announces a stage ("Sleep stage ...", "Stage ...", "Hypnogram ...")."""
    return norm.startswith(_STAGE_PREFIXES)
