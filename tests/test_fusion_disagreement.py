"""Ranking of nights by disagreement and the likely reasons (sleepfuse.fusion.disagreement)."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest

from sleepfuse.fusion.disagreement import MAD_SCALE, diary_outliers, rank_disagreements
from sleepfuse.fusion.pairs import agreement_table
from sleepfuse.scoring.nights import NIGHT_COLUMNS


def night_table(rows: list[dict]) -> pd.DataFrame:
    """An invented night table: only the columns the ranking reads are filled."""
    full = []
    for r in rows:
        row = {c: math.nan for c in NIGHT_COLUMNS}
        row.update(window_start="", window_end="", window_rule="lights off/on markers" if r["source"] == "psg" else "",
                   included=True, qc="")
        row.update(r)
        full.append(row)
    return pd.DataFrame(full, columns=NIGHT_COLUMNS)


def pairs(values: list[tuple[str, str, float, float]], *, offwrist=None, rules=None) -> pd.DataFrame:
    rows = []
    for pid, night, act, psg in values:
        rows.append({"participant": pid, "night": night, "source": "actigraphy", "tst_min": act,
                     "offwrist_min": (offwrist or {}).get((pid, night), 0.0)})
        rows.append({"participant": pid, "night": night, "source": "psg", "tst_min": psg,
                     "window_rule": (rules or {}).get((pid, night), "lights off/on markers")})
    return night_table(rows)


AGREEMENT = pd.DataFrame([{"parameter": "tst_min", "pair": "actigraphy-psg", "bias": 10.0, "loa_low": -10.0,
                           "loa_high": 30.0}])


def test_loa_ratio_and_beyond_flag_follow_the_limits():
    # bias 10, limits -10..30: half-width 20 (Bland & Altman 1986: limits = bias ± 1.96 SD)
    nights = pairs([("A", "2026-01-01", 400, 400), ("B", "2026-01-01", 450, 400), ("C", "2026-01-01", 420, 400),
                    ("D", "2026-01-01", 380, 400)])
    ranked = rank_disagreements(nights, "actigraphy", "psg", "tst_min", agreement=AGREEMENT)
    got = dict(zip(ranked["participant"], ranked["loa_ratio"]))
    assert got == pytest.approx({"A": -0.5, "B": 2.0, "C": 0.5, "D": -1.5})
    assert list(ranked["participant"]) == ["B", "D", "C", "A"]  # |ratio| descending; A, C tie: larger |difference| first
    assert dict(zip(ranked["participant"], ranked["beyond_loa"])) == {"A": False, "B": True, "C": False, "D": True}
    assert dict(zip(ranked["participant"], ranked["difference"])) == {"A": 0, "B": 50, "C": 20, "D": -20}


def test_absolute_ranking_and_no_limits_fall_back_to_difference():
    nights = pairs([("A", "2026-01-01", 400, 400), ("B", "2026-01-01", 450, 400), ("C", "2026-01-01", 370, 400)])
    by_abs = rank_disagreements(nights, "actigraphy", "psg", "tst_min", agreement=AGREEMENT, by="absolute")
    assert list(by_abs["participant"]) == ["B", "C", "A"]
    no_limits = rank_disagreements(nights, "actigraphy", "psg", "tst_min")
    assert list(no_limits["participant"]) == ["B", "C", "A"]
    assert no_limits["loa_ratio"].isna().all() and not no_limits["beyond_loa"].any()


def test_reasons_non_wear_markers_and_clock_offset():
    nights = pairs([("A", "2026-01-01", 400, 400), ("B", "2026-01-01", 450, 400), ("C", "2026-01-02", 420, 400)],
                   offwrist={("B", "2026-01-01"): 95.0},
                   rules={("C", "2026-01-02"): "first to last scored epoch (no lights markers)"})
    epochs = [{"participant": "A", "night": "2026-01-01", "offset_flag": True, "clock_offset_min": -12.0},
              {"participant": "C", "night": "2026-01-02", "offset_flag": False, "clock_offset_min": 1.0}]
    ranked = rank_disagreements(nights, "actigraphy", "psg", "tst_min", agreement=AGREEMENT, epoch_rows=epochs)
    reasons = dict(zip(ranked["participant"], ranked["reason"]))
    assert reasons == {"A": "clock offset (-12 min)", "B": "non-wear (95 min)", "C": "no lights markers"}


def test_diary_outlier_rule_is_three_scaled_mads():
    # values 400..409 plus 470: median 405, MAD 3 -> scaled 4.4478; 470 is (65 / 4.4478) = 14.6 MADs away,
    # 409 is 0.9 (Leys et al. 2013 rule, computed by hand here)
    vals = [400, 401, 402, 403, 404, 405, 406, 407, 408, 409, 470]
    rows = [{"participant": f"P{i:02d}", "night": "2026-01-01", "source": "diary", "tst_min": float(v)}
            for i, v in enumerate(vals)]
    nights = night_table(rows)
    med = np.median(vals)
    mad = MAD_SCALE * np.median(np.abs(np.array(vals) - med))
    assert mad == pytest.approx(1.4826 * 3)
    assert diary_outliers(nights, "tst_min") == {("P10", "2026-01-01")}
    assert diary_outliers(nights, "tst_min", outlier_mad=100) == set()


def test_unknown_parameter_and_bad_sort_are_refused():
    nights = pairs([("A", "2026-01-01", 400, 400)])
    with pytest.raises(ValueError, match="not reported by both"):
        rank_disagreements(nights, "actigraphy", "psg", "n3_min")
    with pytest.raises(ValueError, match="relative"):
        rank_disagreements(nights, "actigraphy", "psg", "tst_min", by="largest")


def test_demo_study_off_wrist_night_ranks_first():
    """The invented demo study's P04 wore no watch for 130 min on 2026-11-01 (sample_records/generate.py)."""
    from pathlib import Path

    from sleepfuse.run.engine import run_study

    result = run_study(Path(__file__).resolve().parents[1] / "sample_records", keep_detail=False)
    ranked = rank_disagreements(result.nights, "diary", "actigraphy", "tst_min",
                                agreement=agreement_table(result.nights))
    top = ranked.iloc[0]
    assert (top["participant"], top["night"]) == ("P04", "2026-11-01")
    assert top["beyond_loa"] and top["reason"].startswith("non-wear")
