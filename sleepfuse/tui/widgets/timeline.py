"""The night timeline: every instrument of one participant-night on one shared time axis.

``night_picture`` slices the scored arrays once (hypnogram epochs, per-minute
counts and sleep/wake/off-wrist codes, diary times, sleep-opportunity
windows); ``NightTimeline`` bins them to the terminal width with numpy on
each resize and draws text rows. Stage is shown by height (one row per
stage) so the strip reads without colour.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from rich.text import Text
from textual.widget import Widget

from sleepfuse.model.clock import localize
from sleepfuse.model.stages import Stage

NS_PER_S = 1_000_000_000
GUTTER = 7
STAGE_ROWS = [(Stage.WAKE, "PSG  W "), (Stage.REM, "     R "), (Stage.N1, "    N1 "), (Stage.N2, "    N2 "),
              (Stage.N3, "    N3 ")]
STAGE_STYLE = {Stage.WAKE: "yellow", Stage.REM: "magenta", Stage.N1: "cyan", Stage.N2: "blue", Stage.N3: "bold blue"}
SPARK = " ▁▂▃▄▅▆▇█"
ACT_GLYPH = {int(Stage.SLEEP): ("█", "blue"), int(Stage.WAKE): ("·", "yellow"), int(Stage.OFFWRIST): ("×", "red"),
             int(Stage.UNSCORED): ("?", "")}
WINDOW_ROWS = [("psg", "win PSG", "green"), ("actigraphy", "win ACT", "cyan"), ("diary", "win DIA", "magenta")]
DIARY_MARKS = [("tried_to_sleep", "T"), ("onset", "O"), ("final_awakening", "F"), ("out_of_bed", "U")]
NO_DATA = -99
CODES = np.array([int(s) for s in Stage], dtype=np.int16)


@dataclass
class Series:
    """A regularly sampled code or value series: start (UTC ns), step (s), values."""

    start_ns: int
    step_s: float
    values: np.ndarray


@dataclass
class NightPicture:
    """What the timeline draws for one participant-night (precomputed arrays, UTC nanoseconds)."""

    participant: str
    night: str
    timezone: str
    t0_ns: int
    t1_ns: int
    stages: Series | None = None
    counts: Series | None = None
    act_codes: Series | None = None
    diary: dict[str, int] = field(default_factory=dict)  # marker -> UTC ns
    windows: dict[str, tuple[int, int, str]] = field(default_factory=dict)  # source -> (start, end, rule)


def _ns(ts, tz: str) -> int:
    """UTC nanoseconds of a time; a naive one is a wall-clock time in ``tz`` (the study's rules, model.clock)."""
    return int(localize(ts, tz).value)


def night_picture(scored, night: str, timezone: str) -> NightPicture:
    """Slice one participant's scored arrays to the night's span (all windows, hypnogram and diary times ± 30 min)."""
    windows = {}
    for source in ("psg", "actigraphy", "diary"):
        w = scored.windows.get((night, source))
        if w is not None:
            windows[source] = (_ns(w.start, timezone), _ns(w.end, timezone), w.rule)
    diary = {}
    entry = scored.diary.get(night)
    if entry is not None:
        for name, _ in DIARY_MARKS:
            if name == "onset":
                if entry.tried_to_sleep is not None and entry.sol_min is not None and math.isfinite(entry.sol_min):
                    diary[name] = _ns(entry.tried_to_sleep, timezone) + int(entry.sol_min * 60 * NS_PER_S)
            elif getattr(entry, name, None) is not None:
                diary[name] = _ns(getattr(entry, name), timezone)
    h = scored.hypnograms.get(night)
    edges = [t for w in windows.values() for t in w[:2]] + list(diary.values())
    if h is not None:
        h0 = _ns(h.start, timezone)
        edges += [h0, h0 + int(h.stages.size * h.epoch_s * NS_PER_S)]
    if edges:
        pad = 30 * 60 * NS_PER_S
        t0, t1 = min(edges) - pad, max(edges) + pad
    else:  # nothing but a day: show 18:00 to 10:00
        base = pd.Timestamp(night)
        t0, t1 = _ns(base + pd.Timedelta(hours=18), timezone), _ns(base + pd.Timedelta(hours=34), timezone)
    pic = NightPicture(scored.participant, night, timezone, t0, t1, diary=diary, windows=windows)
    if h is not None:
        pic.stages = Series(_ns(h.start, timezone), float(h.epoch_s), np.asarray(h.stages, dtype=np.int16))
    best, overlap = None, 0
    for act in scored.actigraphy:
        a0 = _ns(act.start, timezone)
        a1 = a0 + act.codes.size * 60 * NS_PER_S
        ov = min(a1, t1) - max(a0, t0)
        if ov > overlap:
            best, overlap = (act, a0), ov
    if best is not None:
        act, a0 = best
        i0 = max(0, (t0 - a0) // (60 * NS_PER_S))
        i1 = min(act.codes.size, -(-(t1 - a0) // (60 * NS_PER_S)))
        start = a0 + i0 * 60 * NS_PER_S
        pic.counts = Series(start, 60.0, np.asarray(act.counts[i0:i1], dtype=float))
        pic.act_codes = Series(start, 60.0, np.asarray(act.codes[i0:i1], dtype=np.int16))
    return pic


def _columns(series: Series, t0: int, t1: int, width: int) -> tuple[np.ndarray, np.ndarray]:
    """Column index of every sample (by its start time) and the mask of samples on the axis."""
    times = series.start_ns + (np.arange(series.values.size) * series.step_s * NS_PER_S).astype(np.int64)
    col = np.floor((times - t0) / ((t1 - t0) / width)).astype(np.int64)
    ok = (col >= 0) & (col < width)
    return col, ok


def bin_codes(series: Series | None, t0: int, t1: int, width: int) -> np.ndarray:
    """Most frequent code per column (ties: lowest code), NO_DATA where the column has no sample."""
    out = np.full(width, NO_DATA, dtype=np.int16)
    if series is None or series.values.size == 0 or width <= 0:
        return out
    col, ok = _columns(series, t0, t1, width)
    idx = np.searchsorted(CODES_SORTED, series.values)
    tally = np.zeros((width, CODES_SORTED.size), dtype=np.int64)
    np.add.at(tally, (col[ok], idx[ok]), 1)
    has = tally.sum(axis=1) > 0
    out[has] = CODES_SORTED[tally[has].argmax(axis=1)]
    return out


def bin_means(series: Series | None, t0: int, t1: int, width: int) -> np.ndarray:
    """Mean value per column (NaN samples ignored; NaN where the column has none)."""
    if series is None or series.values.size == 0 or width <= 0:
        return np.full(width, np.nan)
    col, ok = _columns(series, t0, t1, width)
    ok &= np.isfinite(series.values)
    s = np.bincount(col[ok], weights=series.values[ok], minlength=width)
    n = np.bincount(col[ok], minlength=width)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(n > 0, s / np.maximum(n, 1), np.nan)


CODES_SORTED = np.sort(CODES)


def _col(t: int, t0: int, t1: int, width: int) -> int:
    return int(math.floor((t - t0) / ((t1 - t0) / width)))


def draw(pic: NightPicture, width: int) -> list[Text]:
    """The timeline's text rows for a plot area of ``width`` columns after the gutter."""
    t0, t1 = pic.t0_ns, pic.t1_ns
    lines: list[Text] = [_axis(pic, width)]
    stages = bin_codes(pic.stages, t0, t1, width)
    for code, label in STAGE_ROWS:
        line = Text(label, style="bold")
        if pic.stages is None:
            line.append("no PSG this night" if code == Stage.WAKE else "", style="dim")
        else:
            chars = np.where(stages == code, "█", np.where(stages == Stage.UNSCORED, "?", " "))
            line.append("".join(chars), style=STAGE_STYLE[code])
        lines.append(line)
    means = bin_means(pic.counts, t0, t1, width)
    line = Text("counts ", style="bold")
    if pic.counts is None:
        line.append("no actigraphy this night", style="dim")
    else:
        top = np.nanpercentile(means, 95) if np.isfinite(means).any() else 0.0
        level = np.where(np.isfinite(means), np.clip(np.ceil(8 * means / top), 0, 8) if top > 0 else 0, 0).astype(int)
        line.append("".join(SPARK[i] for i in level))
    lines.append(line)
    codes = bin_codes(pic.act_codes, t0, t1, width)
    line = Text("wrist  ", style="bold")
    for c in codes:
        glyph, style = ACT_GLYPH.get(int(c), (" ", ""))
        line.append(glyph, style=style)
    lines.append(line)
    lines.append(_diary_row(pic, width))
    for source, label, style in WINDOW_ROWS:
        lines.append(_window_row(pic.windows.get(source), label, style, t0, t1, width))
    return lines


def _axis(pic: NightPicture, width: int) -> Text:
    """Hour ticks in the study's zone: ┊ an hour, ╪ the first hour after a clock change (with the new zone's
    abbreviation where it fits); the last hour is labelled too (left of its tick when there is no room right)."""
    chars = [" "] * width
    t0, t1 = pic.t0_ns, pic.t1_ns
    first = pd.Timestamp(t0, tz="UTC").ceil("h")
    hours = pd.date_range(first, pd.Timestamp(t1, tz="UTC"), freq="h")
    per_hour = width / max((t1 - t0) / (3600 * NS_PER_S), 1e-9)
    step = 1 if per_hour >= 6 else (2 if per_hour >= 3 else 4)
    local = [h.tz_convert(pic.timezone) for h in hours]
    changed = {k for k in range(1, len(local)) if local[k].utcoffset() != local[k - 1].utcoffset()}
    last = len(hours) - 1
    order = sorted(range(len(hours)), key=lambda k: (k not in changed, k != last, k))  # marks first
    for k in order:
        if k % step and k not in changed and k != last:
            continue
        c = _col(hours[k].value, t0, t1, width)
        hh = f"{local[k]:%H}"
        tick = "╪" if k in changed else "┊"
        room = per_hour * step >= 7
        candidates = []
        if k in changed:
            zone = local[k].tzname() or ""
            candidates += [(c, f"{tick}{hh}:00 {zone}"), (c, f"{tick}{hh} {zone}")]
        if room:
            candidates.append((c, f"{tick}{hh}:00"))
        candidates += [(c, f"{tick}{hh}"), (c - 2, f"{hh}{tick}")]
        for start, label in candidates:
            # a blank column on either side keeps two labels apart
            lo, hi = max(start - 1, 0), start + len(label)
            if start >= 0 and hi <= width and all(ch == " " for ch in chars[lo:hi + 1]):
                chars[start:start + len(label)] = label
                break
    return Text(" " * GUTTER + "".join(chars), style="dim")


def _diary_row(pic: NightPicture, width: int) -> Text:
    line = Text("diary  ", style="bold")
    if not pic.diary:
        line.append("no diary times this night", style="dim")
        return line
    chars = [" "] * width
    cols = {k: _col(t, pic.t0_ns, pic.t1_ns, width) for k, t in pic.diary.items()}
    if "tried_to_sleep" in cols and "out_of_bed" in cols:
        for c in range(max(cols["tried_to_sleep"], 0), min(cols["out_of_bed"], width - 1) + 1):
            chars[c] = "─"
    taken: set[int] = set()
    for name, mark in DIARY_MARKS:
        c = cols.get(name)
        if c is None:
            continue
        while c in taken and c + 1 < width:  # two times in one column: the later one moves right
            c += 1
        if 0 <= c < width:
            chars[c] = mark
            taken.add(c)
    line.append("".join(chars), style="bold magenta")
    return line


def _window_row(window, label: str, style: str, t0: int, t1: int, width: int) -> Text:
    line = Text(label + " ", style="bold")
    if window is None:
        line.append("no sleep opportunity", style="dim")
        return line
    a, b = (min(max(_col(t, t0, t1, width), 0), width - 1) for t in window[:2])
    chars = [" "] * width
    for c in range(a, b + 1):
        chars[c] = "─"
    chars[a], chars[b] = "├", "┤"
    line.append("".join(chars), style=style)
    return line


class NightTimeline(Widget):
    """Draws a NightPicture across the widget's width (re-binned on resize only)."""

    DEFAULT_CSS = "NightTimeline { height: 12; }"

    def __init__(self, **kwargs) -> None:
        super().__init__(**kwargs)
        self.picture: NightPicture | None = None
        self._cache: tuple[int, list[Text]] | None = None

    def show(self, picture: NightPicture | None) -> None:
        self.picture, self._cache = picture, None
        self.refresh()

    def render(self) -> Text:
        if self.picture is None:
            return Text("scoring the night…", style="dim")
        width = max(self.size.width - GUTTER, 10)
        if self._cache is None or self._cache[0] != width:
            self._cache = (width, draw(self.picture, width))
        return Text("\n").join(self._cache[1])
