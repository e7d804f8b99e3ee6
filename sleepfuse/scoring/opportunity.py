"""The sleep opportunity [start, end) of each night and source (SLEEP_PARAMETERS.md).

PSG: lights off → lights on (AASM); without markers, first → last scored
epoch. Actigraphy: the diary's tried-to-sleep → out-of-bed for that night;
else event-marker presses; else the automatic rest-interval detector.
Diary: tried to sleep → out of bed. Each window carries the rule that set it.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass

import numpy as np
import pandas as pd

from sleepfuse.model.records import DiaryEntry, Hypnogram
from sleepfuse.model.stages import Stage
from sleepfuse.model.clock import noon_of
from .rest_interval import REST_INTERVAL_RULE, rest_interval

RULE_LIGHTS = "lights off/on markers"
RULE_SCORED_SPAN = "first to last scored epoch (no lights markers)"
RULE_DIARY = "diary tried to sleep to out of bed"
RULE_MARKERS = "event-marker presses"
RULE_DETECTOR = "automatic rest interval"

MARKER_RULE = (
    "Event markers: within the night's noon-to-noon day, the first button press from 18:00 "
    "and the last press before the next noon bound the sleep opportunity, if they are at least 3 h apart."
)


@dataclass(frozen=True)
class Window:
    """A sleep opportunity: tz-aware [start, end) and the rule that set it."""

    start: pd.Timestamp
    end: pd.Timestamp
    rule: str

    @property
    def minutes(self) -> float:
        return (self.end - self.start).total_seconds() / 60.0


def psg_window(h: Hypnogram) -> tuple[Window | None, str]:
    """Lights off → lights on; fallback first → last scored epoch (with a note)."""
    if h.lights_off is not None and h.lights_on is not None and h.lights_on > h.lights_off:
        return Window(h.lights_off, h.lights_on, RULE_LIGHTS), ""
    scored = np.flatnonzero(h.stages != Stage.UNSCORED)
    if scored.size == 0:
        return None, "no scored epoch in the hypnogram: no sleep opportunity"
    start = h.start + pd.Timedelta(seconds=h.epoch_s * int(scored[0]))
    end = h.start + pd.Timedelta(seconds=h.epoch_s * (int(scored[-1]) + 1))
    missing = []
    if h.lights_off is None:
        missing.append("lights off")
    if h.lights_on is None:
        missing.append("lights on")
    why = " and ".join(missing) + " marker missing" if missing else "lights on is not after lights off"
    if h.lights_off is not None and h.lights_on is None and start < h.lights_off < end:
        return Window(h.lights_off, end, "lights off to last scored epoch (no lights on marker)"), (
            f"{why}; sleep opportunity ends at the last scored epoch"
        )
    if h.lights_on is not None and h.lights_off is None and start < h.lights_on < end:
        return Window(start, h.lights_on, "first scored epoch to lights on (no lights off marker)"), (
            f"{why}; sleep opportunity starts at the first scored epoch"
        )
    return Window(start, end, RULE_SCORED_SPAN), f"{why}; sleep opportunity is first to last scored epoch"


def diary_window(entry: DiaryEntry | None) -> Window | None:
    """Tried to sleep → out of bed, when both are known and in order."""
    if entry is None or entry.tried_to_sleep is None or entry.out_of_bed is None:
        return None
    if entry.out_of_bed <= entry.tried_to_sleep:
        return None
    return Window(entry.tried_to_sleep, entry.out_of_bed, RULE_DIARY)


def marker_window(times: pd.DatetimeIndex, marker: np.ndarray, night: dt.date, tz: str) -> Window | None:
    """The night's window from event-marker presses (MARKER_RULE), or None."""
    if marker is None or not marker.any():
        return None
    noon = noon_of(night, tz)
    next_noon = noon_of(night + dt.timedelta(days=1), tz)
    evening = noon + pd.Timedelta(hours=6)
    pressed = times[np.asarray(marker, bool)]
    pressed = pressed[(pressed >= evening) & (pressed < next_noon)]
    if pressed.size < 2:
        return None
    start, end = pressed[0], pressed[-1]
    if (end - start) < pd.Timedelta(hours=3):
        return None
    return Window(start, end, RULE_MARKERS)


def detector_window(
    minute_start: pd.Timestamp, sleep_1min: np.ndarray, valid_1min: np.ndarray, night: dt.date, tz: str
) -> Window | None:
    """The automatic rest interval on the night's noon-to-noon day (REST_INTERVAL_RULE)."""
    noon = noon_of(night, tz)
    next_noon = noon_of(night + dt.timedelta(days=1), tz)
    i0 = int(np.ceil((noon - minute_start).total_seconds() / 60.0))
    i1 = int(np.floor((next_noon - minute_start).total_seconds() / 60.0))
    lo, hi = max(i0, 0), min(i1, sleep_1min.size)
    if hi - lo < 60:
        return None
    found = rest_interval(sleep_1min[lo:hi], valid_1min[lo:hi])
    if found is None:
        return None
    a, b = found
    return Window(
        minute_start + pd.Timedelta(minutes=lo + a), minute_start + pd.Timedelta(minutes=lo + b), RULE_DETECTOR
    )


def cut_window(start: pd.Timestamp, epoch_s: float, codes: np.ndarray, window: Window) -> tuple[np.ndarray, float]:
    """Codes of the epochs whose midpoint lies in the window; epochs outside the record are UNSCORED.

    Returns the codes and the minutes of the window that fall outside the record.
    """
    first = (window.start - start).total_seconds() / epoch_s
    last = (window.end - start).total_seconds() / epoch_s
    # epoch i has its midpoint in [start, end) when first <= i + 0.5 < last
    i0 = int(np.ceil(first - 0.5))
    i1 = int(np.ceil(last - 0.5))
    n = max(i1 - i0, 0)
    out = np.full(n, Stage.UNSCORED, dtype=np.int8)
    lo, hi = max(i0, 0), min(i1, codes.size)
    if hi > lo:
        out[lo - i0: hi - i0] = codes[lo:hi]
    outside = (n - max(hi - lo, 0)) * epoch_s / 60.0
    return out, outside


def edge_minutes(start: pd.Timestamp, epoch_s: float, window: Window) -> tuple[float, float]:
    """Minutes from the window's start to the first epoch ``cut_window`` keeps, and from the end of the
    last one to the window's end (each within ± half an epoch; 0 when the window is on the epoch grid)."""
    first = (window.start - start).total_seconds() / epoch_s
    last = (window.end - start).total_seconds() / epoch_s
    i0, i1 = int(np.ceil(first - 0.5)), int(np.ceil(last - 0.5))
    if i1 <= i0:
        return 0.0, 0.0
    return (i0 - first) * epoch_s / 60.0, (last - i1) * epoch_s / 60.0


def exact_times(params: dict, window: Window, head_min: float, tail_min: float) -> None:
    """Make the window's parameters exact elapsed time: TIB the window's length, SOL and LPS from its
    start, terminal wake to its end, SE on that TIB (sleep and stage minutes stay whole epochs)."""
    if head_min == 0.0 and tail_min == 0.0:
        return
    tib = window.minutes
    params["tib_min"] = tib
    for key in ("sol_min", "lps_min"):
        if key in params:
            params[key] = params[key] + head_min
    if "terminal_wake_min" in params:
        params["terminal_wake_min"] = params["terminal_wake_min"] + tail_min
    tst = params.get("tst_min", float("nan"))
    if tib > 0 and tst == tst:
        params["se_pct"] = 100.0 * tst / tib


__all__ = [
    "edge_minutes",
    "exact_times",
    "Window",
    "psg_window",
    "diary_window",
    "marker_window",
    "detector_window",
    "cut_window",
    "REST_INTERVAL_RULE",
    "MARKER_RULE",
]
