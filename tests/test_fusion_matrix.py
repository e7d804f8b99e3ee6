"""The participant × feature matrix and its codebook: numbers given as text give the same matrix."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd

from sleepfuse.fusion.matrix import codebook, participant_matrix
from sleepfuse.scoring.nights import NIGHT_COLUMNS, SOURCE_PARAMETERS
from sleepfuse.scoring.rhythm import RHYTHM_PARAMETERS


def _nights(seed: int) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    rows = []
    for pid in ("P2", "P1", "P3"):
        for d in range(5):
            for source, params in SOURCE_PARAMETERS.items():
                row = dict.fromkeys(NIGHT_COLUMNS, math.nan)
                row.update(participant=pid, night=f"2026-03-0{d + 1}", source=source, included=bool(rng.random() < 0.8),
                           qc="", window_start="", window_end="", window_rule="")
                row.update({p: float(rng.normal(60, 20)) if rng.random() < 0.9 else math.nan for p in params})
                rows.append(row)
    return pd.DataFrame(rows, columns=NIGHT_COLUMNS)


def test_matrix_and_codebook_from_text_numbers_equal_from_floats():
    # Reference: the same night table with float columns (pandas groupby mean / std ddof=1, Series.skew).
    nights = _nights(5)
    rhythm = pd.DataFrame({"participant": ["P1", "P2", "P3"], **{r: [0.5, 0.6, 0.7] for r in RHYTHM_PARAMETERS}})
    as_text = nights.copy()
    for p in SOURCE_PARAMETERS["psg"]:
        as_text[p] = [("" if math.isnan(v) else repr(v)) for v in nights[p]]  # numbers as text, blanks missing
    expected = participant_matrix(nights, rhythm)
    got = participant_matrix(as_text, rhythm)
    pd.testing.assert_frame_equal(got, expected)
    text_matrix = expected.astype({c: object for c in expected.columns if c != "participant"})
    pd.testing.assert_frame_equal(codebook(text_matrix), codebook(expected))
    book = codebook(expected).set_index("name")
    col = expected["psg_tst_min_mean"]
    assert book.loc["psg_tst_min_mean", "n_nonmissing"] == int(col.notna().sum())
    assert book.loc["psg_tst_min_mean", "skewness"] == float(col.skew())


def test_codebook_states_webster_order_and_missing_minutes():
    # Issue 13: the Webster rule order is a recalled choice; the codebook says so.
    empty = pd.DataFrame(columns=["participant", "night", "source", "included"])
    book = codebook(participant_matrix(empty, pd.DataFrame(columns=["participant"]), participants=["A"]))
    text = book.loc[book["name"] == "actigraphy_nights", "definition"].iloc[0]
    assert "webster_order" in text and "from memory" in text and "neither sleep nor wake" in text
    m10 = book.loc[book["name"] == "actigraphy_m10"].iloc[0]
    assert m10["unit"] == "counts/min"
