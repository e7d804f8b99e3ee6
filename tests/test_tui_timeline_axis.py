"""The night view's time axis (issue 15.9): the clock change is marked, the last hour is labelled.

Times are in America/Chicago; daylight saving ends at 02:00 CDT on 2026-11-01,
when clocks go back to 01:00 CST (US rule: first Sunday of November; IANA tz database).
"""

from __future__ import annotations

import pandas as pd

from sleepfuse.tui.widgets.timeline import GUTTER, NightPicture, _axis

ZONE = "America/Chicago"


def _pic(start: str, end: str) -> NightPicture:
    t0 = pd.Timestamp(start).tz_convert("UTC").value
    t1 = pd.Timestamp(end).tz_convert("UTC").value
    return NightPicture("P01", "2026-10-31", ZONE, t0, t1)


def test_the_repeated_hour_is_marked_with_the_new_zone():
    axis = str(_axis(_pic("2026-10-31T21:30:00-05:00", "2026-11-01T06:30:00-06:00"), 73))[GUTTER:]
    assert "╪01:00 CST" in axis or "╪01 CST" in axis
    assert axis.count("╪") == 1
    assert axis.index("┊01") < axis.index("╪01")  # the first 01:00 (CDT) comes before the second


def test_no_mark_on_an_ordinary_night():
    axis = str(_axis(_pic("2026-10-28T22:00:00-05:00", "2026-10-29T06:40:00-05:00"), 73))
    assert "╪" not in axis


def test_the_last_hour_is_labelled_even_at_the_right_edge():
    # the 06:00 tick falls two columns before the end: its label goes to the left of the tick
    pic = _pic("2026-10-28T21:40:00-05:00", "2026-10-29T06:05:00-05:00")
    axis = str(_axis(pic, 73))[GUTTER:]
    assert "06" in axis[-6:], axis
    wide = str(_axis(pic, 113))[GUTTER:]
    assert "06" in wide[-6:], wide


def test_an_empty_night_whose_midnight_does_not_exist_opens_on_18_to_10():
    # America/Santiago skips 2026-09-06 00:00 (clocks go from 24:00 to 01:00; IANA tz database,
    # checked with pandas: tz_localize raises on that midnight). The empty night's picture spans
    # 18:00 to 10:00 wall time, each read by the study's clock rules (model.clock.localize).
    from sleepfuse.model.clock import localize
    from sleepfuse.scoring.nights import ScoredParticipant
    from sleepfuse.tui.widgets.timeline import night_picture

    zone = "America/Santiago"
    pic = night_picture(ScoredParticipant("P01"), "2026-09-06", zone)
    assert pic.t0_ns == localize(pd.Timestamp("2026-09-06 18:00"), zone).value
    assert pic.t1_ns == localize(pd.Timestamp("2026-09-07 10:00"), zone).value
    assert (pic.t1_ns - pic.t0_ns) == 16 * 3600 * 10**9


def test_naive_times_follow_the_study_s_clock_rules():
    # A naive time in the autumn repeat is its first pass, one in the spring gap is read with the offset
    # before the change (SLEEP_PARAMETERS.md "Time, nights and intervals"), as every reader reads it.
    from sleepfuse.model.clock import localize
    from sleepfuse.tui.widgets.timeline import _ns

    for wall in ("2026-11-01 01:30", "2026-03-08 02:30", "2026-10-29 23:00"):
        assert _ns(pd.Timestamp(wall), ZONE) == localize(pd.Timestamp(wall), ZONE).value
    assert _ns(pd.Timestamp("2026-03-08 02:30"), ZONE) == pd.Timestamp("2026-03-08T03:30:00-05:00").value
