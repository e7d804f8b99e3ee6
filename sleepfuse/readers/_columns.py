"""Column roles of the CSV and workbook readers: which column of a lab's file holds what.

One function, ``match_columns``, decides it for every reader (and for any
check that wants to say "did you mean"): an explicit name from study.toml
first, then the folder contract's own name, then the trade's common synonyms.
Names are compared without case, spaces, ``_ - / .`` and a trailing unit in
brackets, so "Activity Counts", "activity_counts" and "ACTIVITY (counts)"
are one name.
"""

from __future__ import annotations

import functools
import re
from dataclasses import dataclass, field

# The trade's common names for each role (common practice; neutral words, no device's own layout).
SYNONYMS: dict[str, tuple[str, ...]] = {
    # actigraphy
    "timestamp": ("timestamp", "time stamp", "datetime", "date time", "date/time", "date_time", "date and time",
                  "epoch start", "epoch start time", "start time", "onset"),
    "date": ("date", "day", "calendar date"),
    "time": ("time", "clock", "clock time", "time of day"),
    "counts": ("counts", "count", "activity", "activity counts", "activity count", "activity score",
               "counts per epoch", "activity level"),
    "off_wrist": ("off_wrist", "off wrist", "offwrist", "off-wrist", "non-wear", "nonwear", "non wear",
                  "not worn", "off wrist flag", "non-wear flag", "off-wrist status", "non-wear status"),
    "marker": ("marker", "markers", "event", "events", "event marker", "marker flag", "button"),
    # text hypnograms
    "stage": ("stage", "stages", "sleep stage", "sleep stages", "hypnogram", "score", "scored stage", "label",
              "annotation", "description"),
    "epoch": ("epoch", "epoch number", "epoch no", "epoch nr", "epoch #", "#"),
    "duration": ("duration", "duration s", "dur", "length s"),
    # diaries
    "participant": ("participant", "participant id", "participant_id", "subject", "subject id", "id", "pid"),
    "night": ("night", "night date", "date of night", "night of", "evening", "date", "diary date"),
    "bedtime": ("bedtime", "bed time", "into bed", "got into bed", "went to bed", "in bed", "time into bed",
                "time went to bed"),
    "tried_to_sleep": ("tried_to_sleep", "tried to sleep", "lights off", "lights out", "try to sleep",
                       "time tried to sleep", "attempted sleep"),
    "sol_min": ("sol_min", "sol", "sleep onset latency", "minutes to fall asleep", "sleep latency"),
    "nwak": ("nwak", "awakenings", "number of awakenings", "n awakenings", "nawak"),
    "waso_min": ("waso_min", "waso", "wake after sleep onset", "minutes awake", "minutes awake during the night"),
    "final_awakening": ("final_awakening", "final awakening", "woke up", "final wake", "wake time",
                        "time of final awakening", "wake up time"),
    "out_of_bed": ("out_of_bed", "out of bed", "got up", "rise time", "got out of bed", "time out of bed",
                   "rising time"),
    "quality": ("quality", "sleep quality", "rating", "quality rating"),
}

_UNIT = re.compile(r"\s*[\(\[][^\)\]]*[\)\]]\s*$")
_SEPARATORS = re.compile(r"[\s_\-/.]+")


@functools.lru_cache(maxsize=4096)
def normalise_name(name: str) -> str:
    """A column name for comparison: no case, no separators, no trailing unit in brackets."""
    text = str(name).strip().strip('"').strip()
    bare = _UNIT.sub("", text)
    return _SEPARATORS.sub("", (bare or text).casefold())


def _unit_of(name: str) -> str:
    """The normalised text of a trailing bracket ("Movement (counts)" -> "counts"), or ""."""
    m = _UNIT.search(str(name).strip())
    return _SEPARATORS.sub("", m.group(0).strip().strip("()[]").casefold()) if m else ""


@dataclass
class ColumnMatch:
    """Where each role sits in a header (None: absent), how it was found, and the columns left over."""

    index: dict[str, int | None]
    how: dict[str, str] = field(default_factory=dict)  # role -> "study.toml", "name" or "synonym"
    unknown: list[str] = field(default_factory=list)

    def describe(self, header: list[str]) -> str:
        found = [f"{header[j]!r} → {role}" for role, j in self.index.items() if j is not None]
        return ", ".join(found)


def match_columns(header: list[str], roles: tuple[str, ...], explicit: dict[str, str] | None = None,
                  defaults: dict[str, str] | None = None) -> ColumnMatch:
    """The column of each role in ``header``: an explicit name (study.toml) first, then the
    contract's default name, then ``SYNONYMS``. A column serves one role at most; roles
    earlier in ``roles`` choose first. Columns serving no role are listed in ``unknown``."""
    explicit = explicit or {}
    defaults = defaults or {}
    norm = [normalise_name(h) for h in header]
    taken: set[int] = set()
    index: dict[str, int | None] = {}
    how: dict[str, str] = {}

    def first(names, where):
        for name in names:
            if name in header and header.index(name) not in taken:
                return header.index(name)
        for name in names:
            key = normalise_name(name)
            for j, n in enumerate(norm):
                if n == key and j not in taken:
                    return j
        return None

    for role in roles:  # explicit names and the contract's own names before any synonym
        if role in explicit:
            j = first([explicit[role]], "study.toml")
            index[role], how[role] = j, "study.toml"
        else:
            j = first([defaults.get(role, role)], "name")
            index[role] = j
            if j is not None:
                how[role] = "name"
        if index[role] is not None:
            taken.add(index[role])
    units = [_unit_of(h) for h in header]
    for role in roles:
        if index[role] is None and role not in explicit:
            j = first(SYNONYMS.get(role, ()), "synonym")
            if j is None:  # "Movement (counts)": the unit in brackets names the role
                keys = {normalise_name(n) for n in (role, *SYNONYMS.get(role, ()))}
                j = next((k for k, u in enumerate(units) if u in keys and k not in taken), None)
            if j is not None:
                index[role], how[role] = j, "synonym"
                taken.add(j)
    unknown = [h for j, h in enumerate(header) if j not in taken and str(h).strip()]
    return ColumnMatch(index, how, unknown)


def suggest(name: str, header: list[str]) -> str | None:
    """The header name closest to ``name`` (a "did you mean" hint), or None."""
    import difflib

    norm = {normalise_name(h): h for h in header if str(h).strip()}
    close = difflib.get_close_matches(normalise_name(name), list(norm), n=1, cutoff=0.6)
    return norm[close[0]] if close else None


def role_counter(roles: tuple[str, ...], explicit: dict[str, str] | None = None,
                 defaults: dict[str, str] | None = None):
    """``fields -> how many of them name a role``: finds the header row below metadata lines."""
    names = _names(tuple(roles), tuple(sorted((explicit or {}).items())), tuple(sorted((defaults or {}).items())))

    def count(fields: list[str]) -> int:
        return len({normalise_name(f) for f in fields if f and not f.lstrip()[:1].isdigit()} & names)

    return count


@functools.lru_cache(maxsize=64)
def _names(roles, explicit, defaults) -> frozenset[str]:
    explicit, defaults = dict(explicit), dict(defaults)
    return frozenset(normalise_name(n) for role in roles
                     for n in (explicit.get(role, ""), defaults.get(role, role), *SYNONYMS.get(role, ())) if n)
