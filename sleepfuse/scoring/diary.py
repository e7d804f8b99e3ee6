"""Diary parameters: the arithmetic of SLEEP_PARAMETERS.md on one diary row.

Times are tz-aware, so every difference is elapsed time (DST-safe):
tib = out_of_bed − tried_to_sleep; tst = (final_awakening − tried_to_sleep)
− sol − waso; spt = final_awakening − (tried_to_sleep + sol); terminal_wake =
out_of_bed − final_awakening; se = 100·tst/tib; in_bed = out_of_bed − bedtime.
A row whose arithmetic is impossible is rejected, never fixed.
"""

from __future__ import annotations

import math

from sleepfuse.model.records import DiaryEntry
from sleepfuse.model.clock import elapsed_min

DIARY_PARAMETERS = (
    "tib_min",
    "sol_min",
    "tst_min",
    "spt_min",
    "waso_min",
    "terminal_wake_min",
    "se_pct",
    "nwak",
    "in_bed_min",
    "quality",
)
_NAN = float("nan")


class DiaryRowRejected(ValueError):
    """The diary row's times or numbers cannot describe a real night."""


def _num(value: float | None) -> float:
    return _NAN if value is None else float(value)


def _span(a, b) -> float:
    return _NAN if a is None or b is None else elapsed_min(a, b)


def diary_parameters(entry: DiaryEntry) -> dict[str, float]:
    """Derived and reported diary parameters; raises DiaryRowRejected naming the problem."""
    tib = _span(entry.tried_to_sleep, entry.out_of_bed)
    to_final = _span(entry.tried_to_sleep, entry.final_awakening)
    sol, waso = _num(entry.sol_min), _num(entry.waso_min)
    tst = to_final - sol - waso
    spt = to_final - sol
    terminal = _span(entry.final_awakening, entry.out_of_bed)
    in_bed = _span(entry.bedtime, entry.out_of_bed)
    where = f"line {entry.line}, night {entry.night}"
    if tib <= 0:
        raise DiaryRowRejected(f"{where}: out of bed ({_clock(entry.out_of_bed)}) is not after tried to sleep ({_clock(entry.tried_to_sleep)})")
    if to_final < 0:
        raise DiaryRowRejected(f"{where}: final awakening ({_clock(entry.final_awakening)}) is before tried to sleep ({_clock(entry.tried_to_sleep)})")
    if spt < 0:
        raise DiaryRowRejected(
            f"{where}: final awakening ({_clock(entry.final_awakening)}) is before sleep onset "
            f"(tried to sleep {_clock(entry.tried_to_sleep)} + {sol:g} min latency)"
        )
    if terminal < 0:
        raise DiaryRowRejected(f"{where}: out of bed ({_clock(entry.out_of_bed)}) is before final awakening ({_clock(entry.final_awakening)})")
    if tst < 0:
        raise DiaryRowRejected(
            f"{where}: negative total sleep time ({tst:.0f} min): latency {sol:g} + WASO {waso:g} min "
            f"exceed the {to_final:.0f} min from tried to sleep to final awakening"
        )
    if in_bed < 0:
        raise DiaryRowRejected(f"{where}: out of bed ({_clock(entry.out_of_bed)}) is before bedtime ({_clock(entry.bedtime)})")
    se = 100.0 * tst / tib if tib > 0 and not math.isnan(tst) else _NAN
    return {
        "tib_min": tib,
        "sol_min": sol,
        "tst_min": tst,
        "spt_min": spt,
        "waso_min": waso,
        "terminal_wake_min": terminal,
        "se_pct": se,
        "nwak": _num(entry.nwak),
        "in_bed_min": in_bed,
        "quality": _num(entry.quality),
    }


def _clock(ts) -> str:
    return "missing" if ts is None else ts.strftime("%Y-%m-%d %H:%M")
