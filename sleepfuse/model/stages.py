"""Epoch state codes shared by readers and scoring.

One small integer per epoch. PSG hypnograms use WAKE..REM and UNSCORED;
actigraphy sleep/wake series use WAKE, SLEEP (sleep of unknown stage) and
OFFWRIST. Unscored and off-wrist epochs are neither sleep nor wake.
"""

from __future__ import annotations

from enum import IntEnum

import numpy as np


class Stage(IntEnum):
    WAKE = 0
    N1 = 1
    N2 = 2
    N3 = 3
    REM = 4
    SLEEP = 5  # sleep without a stage (actigraphy)
    UNSCORED = -1  # unscored, movement time, unknown label
    OFFWRIST = -2  # actigraph not worn


STAGE_NAMES = {
    Stage.WAKE: "W",
    Stage.N1: "N1",
    Stage.N2: "N2",
    Stage.N3: "N3",
    Stage.REM: "R",
    Stage.SLEEP: "S",
    Stage.UNSCORED: "?",
    Stage.OFFWRIST: "off",
}

STAGE_DTYPE = np.int8


def is_sleep(codes: np.ndarray) -> np.ndarray:
    """True where an epoch is any sleep (N1, N2, N3, R or unstaged sleep)."""
    codes = np.asarray(codes)
    return (codes >= Stage.N1) & (codes <= Stage.SLEEP)
