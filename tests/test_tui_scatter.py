"""The app's Bland–Altman scatter and statistics lines (issue 19.1, 19.2)."""

from __future__ import annotations

import numpy as np

from sleepfuse.tui.screens.agreement import proportional_line, stats_text
from sleepfuse.tui.widgets.scatter import scatter_rows


def _plot(**extra) -> list[str]:
    mean = np.array([100.0, 200.0, 300.0, 400.0])
    diff = np.array([-8.0, -2.0, 2.0, 8.0])
    return [str(r) for r in scatter_rows(mean, diff, 0.0, -12.0, 12.0, 60, 20, None, **extra)]


def test_axes_are_labelled():
    rows = _plot(x_label="mean of actigraphy and PSG [min]", y_label="actigraphy − PSG [min]")
    assert "actigraphy − PSG [min]" in rows[0]
    assert rows[-1].strip() == "mean of actigraphy and PSG [min]"
    assert "└" in rows[-2] and "250" in rows[-2]  # the axis numbers: the middle of the means


def test_regression_line_drawn_only_when_given():
    # difference = -0.04 * 250 + 0.04 * mean rises from -8 to +8 across the points (slope 0.04 per unit of mean)
    with_line = "\n".join(_plot(line=(-10.0, 0.04)))
    assert with_line.count("╱") > 20 and "proportional bias" in with_line
    assert "╱" not in "\n".join(_plot()) and "╲" not in "\n".join(_plot())
    falling = "\n".join(_plot(line=(10.0, -0.04)))
    assert falling.count("╲") > 20


def test_line_only_where_proportional_bias_is_flagged():
    row = {"prop_p": 0.0385, "prop_intercept": 5.0, "prop_slope": -0.02}
    assert proportional_line(row) == (5.0, -0.02)
    assert proportional_line({**row, "prop_p": 0.051}) is None  # PROPORTIONAL_P = 0.05 in fusion/agreement.py
    assert proportional_line({**row, "prop_p": float("nan")}) is None


def _row(**kw):
    row = dict(n_nights=11, n_participants=7, bias=-0.04, bias_ci_low=-1.0, bias_ci_high=1.0, sd=6.7,
               loa_low=-13.0, loa_high=13.0, mn_loa_low=-14.0, mn_loa_high=14.0, ccc=0.86, icc=0.87,
               prop_slope=0.64, prop_p=3.6e-6, prop_intercept=-250.0, note="proportional bias (p=3.6e-06); between-participant "
                                                    "variance negative, set to 0")
    row.update(kw)
    return row


def test_p_below_0001_and_no_negative_zero():
    text = str(stats_text(_row()))
    assert "(p < 0.001)" in text and "0.000" not in text
    assert "bias 0.0 " in text and "-0.0" not in text
    assert "(p = 0.051)" in str(stats_text(_row(prop_p=0.0512)))


def test_notes_are_printed_whole():
    text = str(stats_text(_row()))
    assert text.rstrip().endswith("note: between-participant variance negative, set to 0")
    assert "p=3.6e-06" not in text  # the table's own p text is not repeated; the line gives '< 0.001'
    assert "proportional bias" in text.splitlines()[2]
