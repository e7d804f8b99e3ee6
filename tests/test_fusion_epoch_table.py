"""epochs_agreement rows: a large clock offset is flagged only when shifting really improves agreement
(common practice: a flag should mean the device clocks are worth checking)."""

from __future__ import annotations

import numpy as np
import pandas as pd

from sleepfuse.model.config import build_config
from sleepfuse.model.qc import QCLog
from sleepfuse.model.records import Hypnogram
from sleepfuse.scoring.nights import ActigraphyScoring, ScoredParticipant
from sleepfuse.scoring.opportunity import Window
from sleepfuse.model.stages import Stage
from sleepfuse.fusion.epoch_table import epoch_rows

TZ = "Europe/Berlin"


def _participant(shift_min: int, seed: int = 0) -> ScoredParticipant:
    rng = np.random.default_rng(seed)
    start = pd.Timestamp("2026-05-01 23:00", tz=TZ)
    minutes = 480
    sleep = np.ones(minutes, bool)
    for a in rng.choice(np.arange(20, 460), 8, replace=False):  # wake bouts of 6-12 min
        sleep[a:a + rng.integers(6, 13)] = False
    sleep[:20] = False
    psg = np.repeat(np.where(sleep, Stage.N2, Stage.WAKE), 2).astype(np.int8)  # 30-s epochs
    h = Hypnogram(None, start, start, 30.0, psg)
    act_start = start - pd.Timedelta(hours=1)
    act_sleep = np.concatenate([np.zeros(60, bool), sleep, np.zeros(60, bool)])
    act_sleep = np.roll(act_sleep, shift_min)  # the actigraph clock runs shift_min minutes late
    codes = np.where(act_sleep, Stage.SLEEP, Stage.WAKE).astype(np.int8)
    act = ActigraphyScoring(None, act_start, np.zeros(codes.size), act_sleep, np.zeros(codes.size, bool),
                            codes, None, "none")
    p = ScoredParticipant("E1", hypnograms={"2026-05-01": h}, actigraphy=[act])
    p.windows[("2026-05-01", "psg")] = Window(start, start + pd.Timedelta(minutes=minutes), "lights")
    return p


def test_large_offset_with_real_gain_is_flagged():
    cfg, qc = build_config(".", {}), QCLog()
    (row,) = epoch_rows(cfg, _participant(10), qc)
    assert row["clock_offset_min"] == -10 and row["offset_flag"]
    assert row["kappa_at_offset"] == 1.0 and row["kappa"] < 0.9
    assert any("check the device clocks" in e.message for e in qc)


def test_no_flag_without_offset_or_without_gain():
    cfg = build_config(".", {})
    (row,) = epoch_rows(cfg, _participant(0), QCLog())
    assert row["clock_offset_min"] == 0 and not row["offset_flag"]
    strict = build_config(".", {"agreement": {"clock_offset_flag_kappa_gain": 1.0}})
    (row,) = epoch_rows(strict, _participant(10), QCLog())
    assert row["clock_offset_min"] == -10 and not row["offset_flag"]  # gain < 1.0
