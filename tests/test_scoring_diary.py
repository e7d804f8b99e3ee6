"""Diary arithmetic of SLEEP_PARAMETERS.md, including nights across midnight and a DST change."""

import datetime as dt
import math

import pytest

from sleepfuse.model.records import DiaryEntry
from sleepfuse.scoring.diary import DiaryRowRejected, diary_parameters
from sleepfuse.model.clock import clock_on_night

TZ = "America/Chicago"


def entry(night, bed, tried, final, out, sol=20, waso=30, nwak=2, quality=3):
    n = dt.date.fromisoformat(night)
    t = lambda s: clock_on_night(dt.time.fromisoformat(s), n, TZ)  # noqa: E731  noon rule
    return DiaryEntry("P1", n, 2, t(bed), t(tried), t(final), t(out), sol, nwak, waso, quality)


def test_arithmetic_by_hand():
    # tib = out - tried = 23:00 -> 07:00 = 480; tst = (final - tried) - sol - waso = 450 - 20 - 30 = 400
    # spt = final - (tried + sol) = 430; terminal wake = out - final = 30; se = 100*400/480
    p = diary_parameters(entry("2026-10-20", "22:45", "23:00", "06:30", "07:00"))
    assert p["tib_min"] == 480 and p["tst_min"] == 400 and p["spt_min"] == 430
    assert p["terminal_wake_min"] == 30 and p["in_bed_min"] == 495
    assert p["se_pct"] == pytest.approx(100 * 400 / 480)
    assert p["nwak"] == 2 and p["quality"] == 3


def test_across_fall_back_is_real_elapsed_time():
    # 2026-11-01 02:00 CDT -> 01:00 CST (IANA tz database): the night is one hour longer than the wall clock says
    p = diary_parameters(entry("2026-10-31", "22:45", "23:00", "06:30", "07:00"))
    assert p["tib_min"] == 540 and p["tst_min"] == 460


def test_across_spring_forward():
    p = diary_parameters(entry("2026-03-07", "22:45", "23:00", "06:30", "07:00"))
    assert p["tib_min"] == 420


def test_bedtime_after_midnight_noon_rule():
    p = diary_parameters(entry("2026-10-20", "00:10", "00:20", "07:00", "07:30", sol=10, waso=0))
    assert p["tib_min"] == 430 and p["tst_min"] == 390


@pytest.mark.parametrize(
    "kwargs, fragment",
    [
        (dict(tried="23:00", final="06:30", out="22:00"), "out of bed"),
        (dict(tried="23:00", final="22:30", out="07:00"), "final awakening"),
        (dict(tried="23:00", final="23:10", out="07:00", sol=20), "before sleep onset"),
        (dict(tried="23:00", final="06:30", out="06:00"), "before final awakening"),
        (dict(tried="23:00", final="01:00", out="07:00", sol=60, waso=90), "negative total sleep time"),
    ],
)
def test_impossible_rows_rejected_with_line(kwargs, fragment):
    args = dict(bed="22:45", sol=20, waso=30)
    args.update(kwargs)
    e = entry("2026-10-20", args.pop("bed"), args.pop("tried"), args.pop("final"), args.pop("out"), **args)
    with pytest.raises(DiaryRowRejected) as info:
        diary_parameters(e)
    assert fragment in str(info.value) and "line 2" in str(info.value)


def test_missing_values_give_nan_not_error():
    e = entry("2026-10-20", "22:45", "23:00", "06:30", "07:00")
    e.sol_min = None
    p = diary_parameters(e)
    assert math.isnan(p["tst_min"]) and p["tib_min"] == 480
