"""Units and definitions of the codebook (sleepfuse/definitions.py) against what the code computes."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from sleepfuse.model.definitions import DEFINITION_CHOICES, PARAMETERS
from sleepfuse.scoring.rhythm import rest_activity_rhythm


@pytest.mark.parametrize("epoch_s", [15.0, 30.0, 60.0])
def test_m10_and_l5_are_counts_per_minute_whatever_the_epoch(epoch_s):
    # SLEEP_PARAMETERS.md: M10 and L5 are in counts per minute. 3 days: 12 counts per minute from 08:00 to
    # 20:00, 2 per minute otherwise, as epochs of epoch_s seconds.
    per_min = np.tile(np.r_[np.full(8 * 60, 2.0), np.full(12 * 60, 12.0), np.full(4 * 60, 2.0)], 3)
    per_epoch = np.repeat(per_min * epoch_s / 60.0, int(60 / epoch_s))
    r = rest_activity_rhythm(pd.Timestamp("2026-03-02 00:00", tz="UTC"), epoch_s, per_epoch,
                             np.ones(per_epoch.size, bool))
    assert r["m10"] == pytest.approx(12.0) and r["l5"] == pytest.approx(2.0)
    assert PARAMETERS["m10"].unit == PARAMETERS["l5"].unit == "counts/min"
    assert "counts per minute" in PARAMETERS["m10"].definition


def test_iv_range_label_covers_what_iv_reaches():
    # Van Someren et al. 1999: IV ~ 2 for noise; an hour-by-hour alternation approaches 4.
    hours = np.tile([0.0, 100.0], 24 * 4)
    per_min = np.repeat(hours, 60)
    r = rest_activity_rhythm(pd.Timestamp("2026-03-02 00:00", tz="UTC"), 60.0, per_min, np.ones(per_min.size, bool))
    assert 3.9 < r["iv"] <= 4.0
    assert PARAMETERS["iv"].unit == "ratio 0-4"


def test_generalised_is_and_iv_are_stated():
    # The forms used with missing hours (sleepfuse/scoring/rhythm.py) are stated in the codebook and provenance.
    assert "valid hours" in PARAMETERS["is"].definition and "generalised" in PARAMETERS["is"].definition
    assert "pairs of consecutive valid hours" in PARAMETERS["iv"].definition
    assert "IS weights each clock hour" in DEFINITION_CHOICES["is_iv_missing_hours"]
    assert "exact elapsed minutes" in PARAMETERS["tib_min"].definition
