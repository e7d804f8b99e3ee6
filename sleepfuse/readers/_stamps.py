"""Date and time text as labs write it, to wall-clock datetime64 (no zone yet: that is model.clock's job).

Accepted: year-first (ISO and ``2026/10/27``), day-first and month-first
dates with ``/``, ``.`` or ``-``; two- or four-digit years (two digits as
``strptime``'s ``%y``: 69–99 → 19xx, 00–68 → 20xx); a 24-hour or a 12-hour
clock with AM/PM; optional seconds and fractional seconds; a date and a time
in one cell or in two columns. Day-first against month-first is settled by
the values (a first field over 12 is a day, a second field over 12 is a day,
and dates that step by a day or so in one reading and by months in the other
are read the first way); where the values do not settle it, the caller's
``date_order`` (``[study] date_order`` in study.toml) does; else
``DateOrderUnsettled`` names that setting.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np
import pandas as pd

DATE_ORDERS = ("day-first", "month-first")
SETTING = "[study] date_order"

_STAMP = re.compile(
    r"^\s*(?P<a>\d{1,4})(?P<s>[/.\-])(?P<b>\d{1,2})(?P=s)(?P<c>\d{1,4})\.?"
    r"(?:(?:\s*[T ]\s*|\s*,\s*)(?P<H>\d{1,2})[:.](?P<M>\d{2})(?:[:.](?P<S>\d{2})(?:[.,](?P<F>\d{1,9}))?)?"
    r"\s*(?P<P>[AaPp]\.?\s?[Mm]\.?)?)?\s*$"
)
_CLOCK = re.compile(r"^\s*(?P<H>\d{1,2}):(?P<M>\d{2})(?::(?P<S>\d{2})(?:[.,](?P<F>\d{1,9}))?)?\s*(?P<P>[AaPp]\.?\s?[Mm]\.?)?\s*$")
ISO_START = re.compile(r"^\s*\d{4}-\d{2}-\d{2}")


class DateOrderUnsettled(ValueError):
    """Dates such as 03/04/2026 whose values settle neither day-first nor month-first."""

    def __init__(self, example: str):
        self.example = example
        super().__init__(
            f"dates such as {example!r} could be day-first or month-first and the file's values do not settle it; "
            f'set {SETTING} = "day-first" or "month-first" in study.toml'
        )


class DateOrderConflict(ValueError):
    def __init__(self, example_a: str, example_b: str):
        super().__init__(
            f"dates are neither all day-first nor all month-first (e.g. {example_a!r} and {example_b!r}); "
            "fix the dates so that one order holds"
        )


@dataclass
class StampFormat:
    """What a column of time stamps looked like, for the QC log and ``sleepfuse inspect``."""

    order: str  # year-first | day-first | month-first
    separator: str
    year_digits: int
    clock: str  # 24-hour | 12-hour | none
    seconds: str  # none | whole | fractional
    settled_by: str  # the values | the sequence of dates | study.toml

    def describe(self) -> str:
        sep = {"-": "-", "/": "/", ".": "."}[self.separator]
        date = {"year-first": f"Y{sep}M{sep}D", "day-first": f"D{sep}M{sep}Y", "month-first": f"M{sep}D{sep}Y"}[self.order]
        date = date.replace("Y", "YYYY" if self.year_digits == 4 else "YY")
        if self.clock == "none":
            return f"{date} ({self.order}, settled by {self.settled_by})"
        clock = "hh:mm" + {"none": "", "whole": ":ss", "fractional": ":ss.f"}[self.seconds]
        clock += " AM/PM" if self.clock == "12-hour" else ""
        return f"{date} {clock} ({self.order}, settled by {self.settled_by})"


def is_iso(texts: pd.Series) -> bool:
    """True when the first non-empty values start with an ISO date (YYYY-MM-DD)."""
    sample = [t for t in texts.iloc[:50] if isinstance(t, str) and t.strip()][:20]
    iso = sum(bool(ISO_START.match(t)) for t in sample)
    return iso * 2 >= len(sample) and iso >= sum(bool(_STAMP.match(t)) and not ISO_START.match(t) for t in sample)


def _year(values: pd.Series) -> pd.Series:
    y = values.astype("float64")
    short = values.str.len() <= 2
    return y.where(~short, np.where(y >= 69, 1900 + y, 2000 + y))


def _order(a: pd.Series, b: pd.Series, c: pd.Series, texts: pd.Series, date_order: str) -> tuple[str, str]:
    """(order, settled_by) of the dates a/b/c (strings of the three fields)."""
    if (a.str.len() >= 3).all():
        return "year-first", "the values"
    ai, bi = a.astype(int), b.astype(int)
    day_a, day_b = ai > 12, bi > 12
    if day_a.any() and day_b.any():
        raise DateOrderConflict(texts[day_a].iloc[0], texts[day_b].iloc[0])
    if day_a.any():
        return "day-first", "the values"
    if day_b.any():
        return "month-first", "the values"
    # Every date fits both ways: the order in which dates step through the file may settle it.
    years = _year(c)
    steps = {}
    for order, (m, d) in {"day-first": (bi, ai), "month-first": (ai, bi)}.items():
        days = pd.to_datetime(pd.DataFrame({"year": years, "month": m, "day": d}), errors="coerce")
        jumps = days.dropna().drop_duplicates().diff().dropna().abs()
        steps[order] = jumps.max() if len(jumps) else None
    small, large = pd.Timedelta(days=3), pd.Timedelta(days=20)
    df, mf = steps["day-first"], steps["month-first"]
    if df is not None and mf is not None:
        if df <= small and mf >= large:
            return "day-first", "the sequence of dates"
        if mf <= small and df >= large:
            return "month-first", "the sequence of dates"
    if date_order in DATE_ORDERS:
        return date_order, "study.toml"
    raise DateOrderUnsettled(str(texts.iloc[0]).strip())


def parse_wall(texts: pd.Series, date_order: str = "") -> tuple[np.ndarray, StampFormat | None]:
    """Wall-clock datetime64[us] of date(-time) texts (NaT where unreadable) and the format found.

    Raises DateOrderUnsettled / DateOrderConflict when the dates cannot be read one way.
    """
    texts = texts.astype(str).reset_index(drop=True)
    parts = texts.str.extract(_STAMP)
    found = parts["a"].notna()
    out = np.full(len(texts), np.datetime64("NaT"), dtype="datetime64[us]")
    if not found.any():
        return out, None
    p = parts[found]
    order, settled_by = _order(p["a"], p["b"], p["c"], texts[found], date_order)
    if order == "year-first":
        year, month, day = p["a"].astype(float), p["b"].astype(float), p["c"].astype(float)
        year_digits = 4
    else:
        year = _year(p["c"])
        first, second = p["a"].astype(float), p["b"].astype(float)
        month, day = (second, first) if order == "day-first" else (first, second)
        year_digits = 2 if (p["c"].str.len() <= 2).all() else 4
    hour, clock = _hours(p["H"], p["P"])
    minute = p["M"].astype(float).fillna(0)
    second = p["S"].astype(float).fillna(0)
    micro = p["F"].fillna("0").str.slice(0, 6).str.ljust(6, "0").astype(float)
    frame = pd.DataFrame({"year": year, "month": month, "day": day, "hour": hour.fillna(0),
                          "minute": minute, "second": second, "us": micro})
    bad = hour.isna() & p["H"].notna()
    wall = pd.to_datetime(frame, errors="coerce").to_numpy(dtype="datetime64[us]").copy()
    wall[bad.to_numpy()] = np.datetime64("NaT")
    out[found.to_numpy()] = wall
    seconds = "fractional" if p["F"].notna().any() else ("whole" if p["S"].notna().any() else "none")
    return out, StampFormat(order, p["s"].iloc[0], year_digits, clock if p["H"].notna().any() else "none",
                            seconds, settled_by)


def _hours(hours: pd.Series, meridiem: pd.Series) -> tuple[pd.Series, str]:
    """Hours 0–23 from a 24-hour or 12-hour clock (12 AM = 0, 12 PM = 12); NaN where impossible."""
    h = hours.astype(float)
    pm = meridiem.fillna("").str.upper().str.startswith("P")
    has = meridiem.notna()
    twelve = h.where(~has, np.where(h == 12, 0, h) + np.where(pm, 12, 0))
    impossible = (has & ((h < 1) | (h > 12))) | (~has & (h > 23))
    return twelve.mask(impossible), ("12-hour" if has.any() else "24-hour")


def parse_clock(text: str) -> tuple[int, int, int, int] | None:
    """(hour, minute, second, microsecond) of a clock time ``HH:MM[:SS[.f]]`` with optional AM/PM, else None."""
    m = _CLOCK.match(text)
    if not m:
        return None
    h, mi, s = int(m["H"]), int(m["M"]), int(m["S"] or 0)
    if m["P"]:
        if not 1 <= h <= 12:
            return None
        h = (0 if h == 12 else h) + (12 if m["P"].upper().startswith("P") else 0)
    if h > 23 or mi > 59 or s > 59:
        return None
    return h, mi, s, int((m["F"] or "0")[:6].ljust(6, "0"))
