"""epochs_agreement.csv: actigraphy against PSG epoch by epoch on each PSG night, and pooled.

Epochs are put on the PSG's 30-s grid in absolute time (tz-aware), inside the
PSG sleep opportunity. The clock offset that maximises kappa within
±clock_offset_max_min is reported beside the agreement at the files' clocks,
and nights where it is large are flagged (device clocks drift).
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd

from sleepfuse.model.config import StudyConfig
from sleepfuse.model.qc import QCLog
from ..scoring.nights import ScoredParticipant
from .epochs import epoch_agreement, night_agreement

EPOCH_COLUMNS = [
    "participant", "night", "n_epochs", "sensitivity", "specificity", "accuracy", "kappa",
    "psg_sleep_act_sleep", "psg_sleep_act_wake", "psg_wake_act_wake", "psg_wake_act_sleep",
    "clock_offset_min", "kappa_at_offset", "offset_flag",
]
POOLED = "(pooled)"


def epoch_rows(config: StudyConfig, scored: ScoredParticipant, qc: QCLog) -> list[dict]:
    """One row per PSG night that actigraphy also covers.

    Each night pairs with the first actigraphy record that overlaps its PSG
    window and has an epoch valid at offset 0; ``night_agreement`` gives the
    agreement, its counts and the clock-offset search from one pass.
    """
    max_offset = config.agreement.clock_offset_max_min
    rows = []
    ends: dict[int, pd.Timestamp] = {}
    for night, h in sorted(scored.hypnograms.items()):
        window = scored.windows.get((night, "psg"))
        if window is None:
            continue
        for i, act in enumerate(scored.actigraphy):
            if i not in ends:
                ends[i] = act.start + pd.Timedelta(minutes=act.codes.size)
            if act.start >= window.end or ends[i] <= window.start:
                continue
            found = night_agreement(h.start, h.epoch_s, h.stages, act.start, 60.0, act.sleep, act.valid,
                                    window=(window.start, window.end), max_offset_min=max_offset)
            if found is None:
                continue
            stats, (tp, fn, tn, fp), off = found
            counts = {"psg_sleep_act_sleep": tp, "psg_sleep_act_wake": fn,
                      "psg_wake_act_wake": tn, "psg_wake_act_sleep": fp}
            rows.append(_row(config, scored, night, stats, counts, off, qc))
            break
    return rows


def _row(config: StudyConfig, scored: ScoredParticipant, night: str, stats: dict, counts: dict, off: dict,
         qc: QCLog) -> dict:
    """The night's row from its agreement, counts and offset search; the QC warning when flagged."""
    offset_min = off["offset_s"] / 60.0
    gain = off["kappa_at_best"] - off["kappa_at_zero"]
    flag = bool(np.isfinite(offset_min) and abs(offset_min) >= config.agreement.clock_offset_flag_min
                and np.isfinite(gain) and gain >= config.agreement.clock_offset_flag_kappa_gain)
    if flag:
        qc.warning(
            f"epoch agreement: actigraphy fits PSG best with its clock shifted by {offset_min:+.0f} min "
            f"(kappa {off['kappa_at_zero']:.2f} -> {off['kappa_at_best']:.2f}); check the device clocks",
            participant=scored.participant, night=night,
        )
    return {
        "participant": scored.participant, "night": night, **stats, **counts,
        "clock_offset_min": offset_min, "kappa_at_offset": off["kappa_at_best"], "offset_flag": flag,
    }


def epoch_table(rows: list[dict]) -> pd.DataFrame:
    """Per-night rows plus one pooled row (all nights' epochs together)."""
    df = pd.DataFrame(rows, columns=EPOCH_COLUMNS)
    if df.empty:
        return df
    df = df.sort_values(["participant", "night"]).reset_index(drop=True)
    ss, sw, ww, ws = (int(df[c].sum()) for c in EPOCH_COLUMNS[7:11])
    psg = np.r_[np.ones(ss + sw, bool), np.zeros(ww + ws, bool)]
    act = np.r_[np.ones(ss, bool), np.zeros(sw, bool), np.zeros(ww, bool), np.ones(ws, bool)]
    pooled = epoch_agreement(psg, act)
    pooled_row = {"participant": POOLED, "night": "", **pooled, "psg_sleep_act_sleep": ss, "psg_sleep_act_wake": sw,
                  "psg_wake_act_wake": ww, "psg_wake_act_sleep": ws, "clock_offset_min": math.nan,
                  "kappa_at_offset": math.nan, "offset_flag": False}
    return pd.concat([df, pd.DataFrame([pooled_row], columns=EPOCH_COLUMNS)], ignore_index=True)
