"""Activity-count CSV reader: counts on a regular epoch grid in local time.

Timestamps are ISO 8601; without an offset they are wall-clock times in the
study zone, so the spring-forward hour is no gap and the repeated autumn hour
is no duplicate (its first pass is read as summer time, the pass after the
wall clock steps back as standard time; PEP 495 fold). Parsing is vectorised;
per-row work happens only for the few rows with problems.
"""

from __future__ import annotations

import hashlib
from pathlib import Path

import numpy as np
import pandas as pd

from sleepfuse.model.errors import ReadError
from sleepfuse.model.records import ActigraphyRecord, Problem
from sleepfuse.model.clock import zone
from ._actigraphy_table import ROLES, parse_counts, parse_flags, read_careful, unmapped_optional
from ._columns import match_columns
from ._csvtext import BOM, MAX_DETAILED, fast_dialect, line_phrase, plain_text, read_fast_columns, read_raw
from ._csvtime import _localize_wall
from ._countcheck import MAX_COUNT_PER_MIN, epoch_change, implausible_counts

ACTIGRAPHY_DEFAULT_COLUMNS = {"timestamp": "timestamp", "counts": "counts", "off_wrist": "off_wrist", "marker": "marker"}
ALLOWED_EPOCHS_S = (15, 30, 60)
FAST_PATH = True  # plain files through pyarrow's reader; False forces the exact path (tests compare both)
MAX_SPAN_DAYS = 400  # longer than any wrist recording: a clock error, not data
_US = 1_000_000  # microseconds per second; instants are int64 µs since the epoch (UTC)


def read_actigraphy(path, tz: str, *, columns: dict[str, str] | None = None, date_order: str = "",
                    max_count_per_min: float = MAX_COUNT_PER_MIN) -> ActigraphyRecord:
    """Read an activity-count CSV into an ActigraphyRecord on a regular epoch grid.

    ``tz`` is the study's IANA zone; ``columns`` maps timestamp/date/time/counts/
    off_wrist/marker to the file's column names (study.toml ``[actigraphy] columns``);
    without them the folder contract's names and the trade's synonyms are looked for.
    ``date_order`` ("day-first" / "month-first") reads dates the file's values leave open.
    Plain files (UTF-8, ISO time stamps, the contract's names) take a fast path; any
    other dialect the careful one (``_actigraphy_table``), which says what it detected.
    """
    path = Path(path)
    try:
        zone(tz)
    except ValueError as exc:
        raise ReadError(path, str(exc)) from None
    names = dict(ACTIGRAPHY_DEFAULT_COLUMNS)
    names.update(columns or {})
    raw = read_raw(path)
    digest = hashlib.sha256(raw).hexdigest()  # provenance of exactly the bytes read
    bom = raw.startswith(BOM)
    raw = raw[3:] if bom else raw
    fast = _read_plain(raw, names, tz) if FAST_PATH and plain_text(raw) else None
    detected: dict[str, str] = {}
    header_epoch = None
    decimal = "."
    if fast is not None:
        header, instants, lines_ok, values, local_problems = fast
        match = match_columns(header, ROLES, columns, names)
        problems = unmapped_optional(header, match.index, names, columns) + local_problems
        dialect = fast_dialect(raw, bom)
        detected = {"dialect": dialect.describe(), "columns": match.describe(header),
                    "time stamps": f"{names['timestamp']!r}: ISO 8601"}
        if match.unknown:
            detected["unused columns"] = ", ".join(map(repr, match.unknown))
        if match.unknown or not dialect.plain:
            problems.insert(0, Problem("info", "read as: " + "; ".join(f"{k}: {v}" for k, v in detected.items())))
        rows = None
    else:
        instants, lines_ok, rows, col, problems, detected, header_epoch, decimal = read_careful(
            path, names, columns, tz, date_order)

    keep, outliers = _drop_isolated_outliers(instants, lines_ok)
    problems += outliers
    if keep is not None:
        instants, lines_ok = instants[keep], lines_ok[keep]
        if rows is not None:
            rows = rows.iloc[keep]
        else:
            values = {k: v[keep] for k, v in values.items()}
    epoch_s = _infer_epoch(path, instants, lines_ok) if instants.size > 1 or header_epoch is None else header_epoch
    if header_epoch is not None and header_epoch != epoch_s:
        problems.append(Problem("warning", f"the header lines give a {header_epoch}-s epoch but the time stamps step "
                                           f"by {epoch_s} s; the time stamps are used"))
    detected["epoch length"] = f"{epoch_s} s"
    span_days = (instants.max() - instants[0]) / (86400 * _US)
    if span_days > MAX_SPAN_DAYS:
        raise ReadError(
            path,
            f"timestamps span {span_days:.0f} days (line {lines_ok[0]} to line {lines_ok[int(np.argmax(instants))]}); "
            f"more than {MAX_SPAN_DAYS} days means a wrong device clock; fix the timestamps",
        )

    slots, first_of_slot, grid_problems = _place_on_grid(instants, lines_ok, epoch_s, tz)
    problems += grid_problems
    n = int(slots.max()) + 1
    start = _local(instants[0], tz)
    place = slots[first_of_slot]

    if rows is None:  # plain file: every cell already checked
        counts_row = values["counts"]
    else:
        counts_row, count_problems = parse_counts(rows[col["counts"]], lines_ok, instants, tz, decimal)
        problems += count_problems
    # counts no device gives (above the ceiling, infinite): missing, by line; mostly such: rejected (_countcheck.py)
    counts_row, count_problems = implausible_counts(path, counts_row, lines_ok, epoch_s, max_count_per_min)
    problems += count_problems
    # every row kept, one per epoch in order (the usual file): place and first_of_slot are both 0..n-1
    identity = place.size == n and first_of_slot.size == counts_row.size
    if identity:
        counts = np.array(counts_row, dtype=np.float64)
    else:
        counts = np.full(n, np.nan)
        counts[place] = counts_row[first_of_slot]

    flags_out: dict[str, np.ndarray | None] = {"off_wrist": None, "marker": None}
    for key in flags_out:
        if rows is None:
            if key not in values:
                continue
            flags = values[key].astype(bool)
        else:
            if col[key] is None:
                continue
            flags, flag_problems = parse_flags(rows[col[key]], lines_ok, instants, tz, key, blank_ok=key == "marker")
            problems += flag_problems
        if identity:
            arr = np.array(flags, dtype=bool)
        else:
            arr = np.zeros(n, dtype=bool)
            arr[place] = flags[first_of_slot]
        flags_out[key] = arr
    off_wrist, marker = flags_out["off_wrist"], flags_out["marker"]

    return ActigraphyRecord(
        path=path, start=start, epoch_s=epoch_s, counts=counts, off_wrist=off_wrist, marker=marker, problems=problems,
        sha256=digest, detected=detected,
    )


def _read_plain(raw: bytes, names: dict[str, str], tz: str):
    """The common file, fast: plain CSV, wall-clock ISO timestamps, numeric counts, 0/1 flags.

    Returns (header, instants, lines, values, problems), or None whenever
    anything is unusual (an offset, a bad or missing value, a quote, a ragged
    row...): the exact path then reads the file and reports every problem by
    line. Both paths give the same record for a plain file
    (tests/test_readers_actigraphy.py checks this).
    """
    import pyarrow as pa

    got = read_fast_columns(
        raw, {names["timestamp"]: pa.timestamp("us"), names["counts"]: pa.float64()},
        {names["off_wrist"]: pa.string(), names["marker"]: pa.string()},
    )
    if got is None:
        return None
    header, cols = got
    counts = cols[names["counts"]].astype(np.float64, copy=False)
    if not (np.isfinite(counts).all() and (counts >= 0).all()):
        return None
    values = {"counts": counts}
    for k in ("off_wrist", "marker"):
        if names[k] in cols:
            text = cols[names[k]].astype(str)
            ones = text == "1"
            if not (ones | (text == "0")).all():  # "true", " 1", "00", blanks...: the exact path's rules
                return None
            values[k] = ones
    wall = cols[names["timestamp"]].astype("datetime64[us]", copy=False)
    lines = np.arange(2, wall.size + 2, dtype=np.int64)
    utc, _, problems = _localize_wall(wall, lines, tz)
    return header, utc, lines, values, problems


def _local(instant_us: int, tz: str) -> pd.Timestamp:
    return pd.Timestamp(int(instant_us), unit="us", tz="UTC").tz_convert(tz)


def _report(messages: list[str], times: list[pd.Timestamp], summary: str) -> list[Problem]:
    """One Problem each for the first few, then one summary line (keeps the QC log readable).

    ``messages`` / ``times`` hold at most MAX_DETAILED + 1 items; ``summary``
    describes all of them and is used when there are more than MAX_DETAILED.
    """
    if len(messages) <= MAX_DETAILED:
        return [Problem("warning", m, time=t) for m, t in zip(messages, times)]
    return [Problem("warning", m, time=t) for m, t in zip(messages[:MAX_DETAILED], times)] + [
        Problem("warning", summary, time=times[MAX_DETAILED])
    ]


def _drop_isolated_outliers(instants, lines):
    """Rows to keep (None: all) after dropping single rows more than a day away from both neighbours
    that agree with each other, and the problem reported."""
    if instants.size < 3:
        return None, []
    day = 86400 * _US
    steps = np.diff(instants)
    if steps.max() <= day and steps.min() >= -day:  # no step over a day: no row can be odd
        return None, []
    prev_gap = np.abs(instants[1:-1] - instants[:-2])
    next_gap = np.abs(instants[2:] - instants[1:-1])
    bridge = np.abs(instants[2:] - instants[:-2])
    odd = np.r_[False, (prev_gap > day) & (next_gap > day) & (bridge <= day), False]
    if not odd.any():
        return None, []
    msg = f"{int(odd.sum())} timestamp(s) more than a day out of sequence with their neighbours ignored ({line_phrase(lines[odd])})"
    return np.flatnonzero(~odd), [Problem("warning", msg)]


def _infer_epoch(path: Path, instants: np.ndarray, lines: np.ndarray) -> int:
    """Epoch length (s): the most common positive step between timestamps; must be 15, 30 or 60; one per file
    (a change part-way is rejected with its line: ``_countcheck.epoch_change``)."""
    steps = np.diff(instants)
    if steps.size and steps[0] > 0 and (steps == steps[0]).all():  # a regular file: one step throughout
        epoch = int(np.round(steps[0] / _US))
    else:
        steps = steps[steps > 0]
        if steps.size == 0:
            raise ReadError(path, "fewer than two distinct timestamps; cannot infer the epoch length")
        seconds = np.round(steps / _US).astype(np.int64)
        values, freq = np.unique(seconds, return_counts=True)
        epoch = int(values[np.argmax(freq)])
        if epoch in ALLOWED_EPOCHS_S:
            epoch_change(path, np.round(np.diff(instants) / _US).astype(np.int64), lines, epoch)
    if epoch not in ALLOWED_EPOCHS_S:
        raise ReadError(
            path,
            f"epoch length {epoch} s found (the most common step between timestamps); "
            f"allowed: {', '.join(map(str, ALLOWED_EPOCHS_S))} s",
        )
    return epoch


def _place_on_grid(instants: np.ndarray, lines: np.ndarray, epoch_s: int, tz: str):
    """Epoch slot of every row on the grid from the first timestamp, and the problems found.

    Returns slots (-1 = dropped: before the first timestamp), the indices of the
    rows kept (first row per slot, file order) and the problems.
    """
    problems: list[Problem] = []
    step = epoch_s * _US
    if instants.size and (np.diff(instants) == step).all():  # a regular file: row i is epoch i, nothing to report
        return np.arange(instants.size, dtype=np.int64), np.arange(instants.size), problems
    rel = instants - instants[0]
    slots = (rel + step // 2) // step
    off = rel - slots * step

    def when(i):
        return _local(instants[i], tz)

    def clock(i):
        return when(i).strftime("%Y-%m-%d %H:%M:%S%z")

    backwards = np.flatnonzero(np.diff(instants) < 0) + 1
    if backwards.size:
        sel = backwards[: MAX_DETAILED + 1]
        problems += _report(
            [f"line {lines[i]}: time goes backwards ({clock(i)} after {clock(i - 1)} on line {lines[i - 1]})" for i in sel],
            [when(i) for i in sel],
            f"time goes backwards at {backwards.size} rows ({line_phrase(lines[backwards])})",
        )
    before = np.flatnonzero(slots < 0)
    if before.size:
        problems.append(
            Problem(
                "warning",
                f"{before.size} row(s) earlier than the first timestamp dropped ({line_phrase(lines[before])})",
                time=when(before[0]),
            )
        )
        slots[before] = -1

    snapped = np.flatnonzero((off != 0) & (slots >= 0))
    if snapped.size:
        sel = snapped[: MAX_DETAILED + 1]
        problems += _report(
            [f"line {lines[i]}: {clock(i)} is not on the {epoch_s}-s epoch grid; moved to the nearest epoch" for i in sel],
            [when(i) for i in sel],
            f"{snapped.size} timestamps not on the {epoch_s}-s epoch grid from {clock(0)} moved to the nearest "
            f"epoch ({line_phrase(lines[snapped])})",
        )

    valid = np.flatnonzero(slots >= 0) if before.size else np.arange(slots.size)
    valid_slots = slots[valid] if before.size else slots
    steps = np.diff(valid_slots)
    if valid_slots.size and (steps > 0).all():  # in order, no duplicates: np.unique's answer
        uniq, first = valid_slots, valid
    else:
        uniq, first_pos = np.unique(valid_slots, return_index=True)
        first = valid[first_pos]
        steps = np.diff(uniq)
    if first.size < valid.size:
        owner = np.full(int(uniq[-1]) + 1, -1, dtype=np.int64)
        owner[uniq] = first
        dup = np.setdiff1d(valid, first, assume_unique=True)
        sel = dup[: MAX_DETAILED + 1]
        problems += _report(
            [f"line {lines[i]}: duplicate of the epoch at {clock(owner[slots[i]])} (line {lines[owner[slots[i]]]}); first kept" for i in sel],
            [when(i) for i in sel],
            f"{dup.size} duplicate epochs; the first row of each kept ({line_phrase(lines[dup])})",
        )

    jump = np.flatnonzero(steps > 1)  # steps == np.diff(uniq)
    if jump.size:
        messages, times = [], []
        for k in jump[: MAX_DETAILED + 1]:
            a, b = first[k], first[k + 1]
            gap_start = _local(instants[0] + (int(uniq[k]) + 1) * step, tz)
            gap_end = _local(instants[0] + int(uniq[k + 1]) * step, tz)
            missing = int(uniq[k + 1] - uniq[k] - 1)
            messages.append(
                f"gap: no data from {gap_start:%Y-%m-%d %H:%M:%S%z} until {gap_end:%Y-%m-%d %H:%M:%S%z} "
                f"({missing} missing epoch(s), {missing * epoch_s / 60:g} min) between line {lines[a]} and line {lines[b]}"
            )
            times.append(gap_start)
        total = int((steps[jump] - 1).sum())
        problems += _report(messages, times, f"{jump.size} gaps in all, {total} missing epochs (counts NaN)")
    return slots, first, problems


