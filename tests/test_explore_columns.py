"""Column sets, complete cases and standardisation (sleepfuse/explore/columns.py)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from sleepfuse.model.errors import ConfigError
from sleepfuse.explore.columns import ColumnSet, block_columns, column_sets, columns_by_pattern, prepare

MATRIX_COLUMNS = [
    "participant",
    "psg_sol_min_mean", "psg_sol_min_sd", "psg_waso_min_mean", "psg_nights",
    "actigraphy_sol_min_mean", "actigraphy_waso_min_sd", "actigraphy_nights",
    "actigraphy_is", "actigraphy_iv", "actigraphy_m10", "actigraphy_l5", "actigraphy_ra",
    "diary_sol_min_mean", "diary_quality_mean", "diary_nights",
]


def test_blocks_take_means_and_rhythm_measures_only():
    assert block_columns(MATRIX_COLUMNS, "psg") == ["psg_sol_min_mean", "psg_waso_min_mean"]
    assert block_columns(MATRIX_COLUMNS, "actigraphy") == [
        "actigraphy_sol_min_mean", "actigraphy_is", "actigraphy_iv", "actigraphy_m10", "actigraphy_l5",
        "actigraphy_ra"]
    assert block_columns(MATRIX_COLUMNS, "diary") == ["diary_sol_min_mean", "diary_quality_mean"]
    everything = block_columns(MATRIX_COLUMNS, "all")
    assert len(everything) == 10
    assert not any(c.endswith(("_sd", "_nights")) for c in everything)
    assert "psg_sol_min_sd" in block_columns(MATRIX_COLUMNS, "psg", statistics=("mean", "sd"))


def test_unknown_block_names_the_allowed_ones():
    with pytest.raises(ConfigError, match="diary, actigraphy, psg, all"):
        block_columns(MATRIX_COLUMNS, "eeg")


def test_patterns_are_fnmatch_globs_in_matrix_order():
    got = columns_by_pattern(MATRIX_COLUMNS, "diary_sol_min_mean, psg_*_mean")
    assert got == ["psg_sol_min_mean", "psg_waso_min_mean", "diary_sol_min_mean"]


def test_a_pattern_matching_nothing_is_an_error_naming_it():
    with pytest.raises(ConfigError, match="psg_sl_min_mean"):
        columns_by_pattern(MATRIX_COLUMNS, "psg_sol_min_mean,psg_sl_min_mean")


def test_column_sets_default_to_all_and_refuse_both_options():
    assert [cs.name for cs in column_sets(MATRIX_COLUMNS)] == ["all"]
    assert [cs.name for cs in column_sets(MATRIX_COLUMNS, blocks="diary,psg,diary")] == ["diary", "psg"]
    with pytest.raises(ConfigError):
        column_sets(MATRIX_COLUMNS, columns="psg_*", blocks="psg")


def _matrix():
    return pd.DataFrame({
        "participant": ["A", "B", "C", "D", "E", "F"],
        "x_mean": [1.0, 2.0, np.nan, 4.0, 5.0, 6.0],
        "y_mean": [2.0, 1.0, 3.0, np.nan, 7.0, 5.0],
        "constant_mean": [3.0] * 6,
        "empty_mean": [np.nan] * 6,
    })


def test_missing_values_exclude_participants_with_reasons_and_no_imputation():
    data = prepare(_matrix(), ColumnSet("t", ("x_mean", "y_mean")))
    assert list(data.participants) == ["A", "B", "E", "F"]
    assert data.excluded.to_dict("records") == [
        {"participant": "C", "reason": "missing x_mean"}, {"participant": "D", "reason": "missing y_mean"}]
    np.testing.assert_array_equal(data.raw[:, 0], [1.0, 2.0, 5.0, 6.0])   # the values themselves, untouched


def test_z_scores_use_the_reported_means_and_sample_sds():
    # Source: z = (x − mean)/SD with the sample SD (ddof = 1), as numpy computes it.
    data = prepare(_matrix(), ColumnSet("t", ("x_mean", "y_mean")))
    np.testing.assert_allclose(data.means, [3.5, 3.75])
    np.testing.assert_allclose(data.sds, np.std([[1, 2], [2, 1], [5, 7], [6, 5]], axis=0, ddof=1))
    np.testing.assert_allclose(data.z.mean(axis=0), 0.0, atol=1e-12)
    np.testing.assert_allclose(data.z.std(axis=0, ddof=1), 1.0)
    table = data.standardisation()
    assert list(table.columns) == ["block", "column", "transform", "mean", "sd", "n"]


def test_constant_and_empty_columns_are_dropped_with_a_note():
    data = prepare(_matrix(), ColumnSet("t", ("x_mean", "constant_mean", "empty_mean")))
    assert data.columns == ("x_mean",)
    assert any("empty_mean" in n and "no participant" in n for n in data.notes)
    assert any("constant_mean" in n and "same value" in n for n in data.notes)


def test_text_in_a_numeric_column_is_a_clear_error():
    m = _matrix()
    m["x_mean"] = m["x_mean"].astype(object)
    m.loc[1, "x_mean"] = "n/a?"
    with pytest.raises(ConfigError, match="x_mean"):
        prepare(m, ColumnSet("t", ("x_mean", "y_mean")))


def test_log_columns_are_fitted_as_log1p_and_reported():
    m = pd.DataFrame({"participant": list("ABCD"), "sol_mean": [0.0, 9.0, 99.0, 4.0], "x_mean": [1.0, 2.0, 4.0, 3.0]})
    data = prepare(m, ColumnSet("t", ("sol_mean", "x_mean")), log_columns={"sol_mean"})
    np.testing.assert_allclose(data.raw[:, 0], np.log([1.0, 10.0, 100.0, 5.0]))
    np.testing.assert_allclose(data.raw[:, 1], [1.0, 2.0, 4.0, 3.0])
    assert data.label("sol_mean") == "ln(1 + sol_mean)" and data.label("x_mean") == "x_mean"
    assert list(data.standardisation()["transform"]) == ["ln(1 + x)", ""]
    m.loc[2, "sol_mean"] = -1.0
    with pytest.raises(ConfigError, match="sol_mean"):
        prepare(m, ColumnSet("t", ("sol_mean", "x_mean")), log_columns={"sol_mean"})
