"""Bland–Altman figures: content of the drawing and the files written."""

from __future__ import annotations

import subprocess
import sys

import numpy as np
import pytest

from sleepfuse.fusion.agreement import agreement
from sleepfuse.output.agreement_rows import CONFIDENCE, drawable_rows, regression_limit_range
from sleepfuse.output.figures import bland_altman_figure, save_figure, write_plots


def _proportional_case():
    """Invented study: 10 participants, 1-4 nights each, actigraphy TST inflating with TST."""
    rng = np.random.default_rng(6)
    nights = rng.integers(1, 5, 10)
    ids = np.repeat([f"P{i:02d}" for i in range(10)], nights)
    group = np.repeat(np.arange(10), nights)
    psg = rng.normal(390, 45, 10)[group] + rng.normal(0, 15, ids.size)
    act = psg * 1.3 - 90 + rng.normal(0, 10, ids.size) + (group % 3) * 12  # p < 0.05 also with nesting
    return act, psg, ids


def _texts(fig) -> str:
    parts = []
    legends = list(fig.legends)
    for ax in fig.axes:
        parts += [ax.get_title(), ax.get_xlabel(), ax.get_ylabel()]
        parts += [t.get_text() for t in ax.texts]
        if ax.get_legend() is not None:
            legends.append(ax.get_legend())
    for legend in legends:
        parts += [t.get_text() for t in legend.get_texts()] + [legend.get_title().get_text()]
    return "\n".join(parts)


def test_proportional_bias_figure_has_all_elements():
    act, psg, ids = _proportional_case()
    stats = agreement(act, psg, ids)
    assert stats["prop_p"] < 0.05 and stats["mn_sd"] != pytest.approx(stats["sd"])
    stats.update(mn_loa_low=stats["loa_low"] - 15, mn_loa_high=stats["loa_high"] + 15)  # apart in the figure
    fig = bland_altman_figure(act, psg, stats, parameter="TST", pair="actigraphy-psg",
                              unit="min", participant=ids)
    ax = fig.axes[0]
    text = _texts(fig)
    assert ax.get_xlabel() == "Mean of actigraphy and PSG (min)"
    assert ax.get_ylabel() == "actigraphy − PSG (min)"
    assert "TST" in ax.get_title() and "actigraphy vs PSG" in ax.get_title()
    assert f"n = {ids.size} nights, 10 participants" in text
    assert "proportional bias: slope" in text and "corrected for repeated nights" in text
    # One point per night, whatever markers the participants get.
    n_points = sum(len(c.get_offsets()) for c in ax.collections if hasattr(c, "get_offsets")
                   and len(c.get_offsets()) and c.get_offsets().shape[1] == 2
                   and c.__class__.__name__ == "PathCollection")
    assert n_points == ids.size
    # The regression line has the fitted slope; horizontal lines carry bias and limits.
    slopes = []
    for line in ax.get_lines():
        xs, ys = (np.asarray(v, float) for v in line.get_data())
        if xs.size == 2 and xs[1] != xs[0] and line.get_linestyle() == "-":
            slopes.append((ys[1] - ys[0]) / (xs[1] - xs[0]))
    assert any(s == pytest.approx(stats["prop_slope"]) for s in slopes)
    levels = {round(float(line.get_ydata()[0]), 6) for line in ax.get_lines()
              if np.ptp(np.asarray(line.get_ydata(), float)) == 0}
    for key in ("bias", "loa_low", "loa_high", "mn_loa_low", "mn_loa_high"):
        assert round(stats[key], 6) in levels


def test_no_regression_line_without_proportional_bias():
    rng = np.random.default_rng(9)
    psg = rng.normal(400, 40, 30)
    act = psg + rng.normal(15, 12, 30)
    stats = agreement(act, psg)
    assert stats["prop_p"] >= 0.05
    fig = bland_altman_figure(act, psg, stats, parameter="WASO", pair="diary-actigraphy", unit="min")
    text = _texts(fig)
    assert "proportional bias" not in text
    # one night per participant: the corrected limits are the ordinary ones, named but not drawn twice
    assert "(not drawn: on the limits of agreement)" in text
    assert fig.axes[0].get_ylabel() == "diary − actigraphy (min)"


def test_fewer_than_three_pairs_figure_says_so(tmp_path):
    stats = agreement([400.0, 380.0], [410.0, 370.0])
    fig = bland_altman_figure([400.0, 380.0], [410.0, 370.0], stats, parameter="TST",
                              pair="actigraphy-psg", unit="min")
    assert "Fewer than 3 paired nights" in _texts(fig)
    paths = save_figure(fig, tmp_path / "tst_actigraphy-psg")
    assert all(p.stat().st_size > 0 for p in paths)


def test_save_figure_writes_png_and_svg(tmp_path):
    act, psg, ids = _proportional_case()
    fig = bland_altman_figure(act, psg, agreement(act, psg, ids), parameter="sleep.efficiency",
                              pair="actigraphy-psg", unit="%", participant=ids)
    paths = save_figure(fig, tmp_path / "figures" / "se.actigraphy-psg")
    assert [p.name for p in paths] == ["se.actigraphy-psg.png", "se.actigraphy-psg.svg"]
    png, svg = paths
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" and png.stat().st_size > 10_000
    text = svg.read_text(encoding="utf-8")
    assert "Mean of actigraphy and PSG (%)" in text and "actigraphy − PSG (%)" in text
    # Atomic writes leave no temporary files behind.
    assert sorted(p.name for p in png.parent.iterdir()) == sorted(p.name for p in paths)


def test_importing_the_module_does_not_import_matplotlib():
    # House style: matplotlib is loaded lazily, only when a figure is drawn.
    code = "import sys, sleepfuse.output.figures; print('matplotlib' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"


def _levels(ax) -> list[float]:
    """y of every horizontal line drawn on the axes."""
    return [float(line.get_ydata()[0]) for line in ax.get_lines()
            if len(line.get_ydata()) and np.ptp(np.asarray(line.get_ydata(), float)) == 0]


def test_confidence_level_and_participant_key_are_stated():
    act, psg, ids = _proportional_case()
    stats = agreement(act, psg, ids)
    fig = bland_altman_figure(act, psg, stats, parameter="TST", pair="actigraphy-psg", unit="min", participant=ids)
    text = _texts(fig)
    assert "shaded bands: 95% CI" in text and f"bias {stats['bias']:.1f} (95% CI" in text
    key = fig.axes[0].get_legend()
    assert key.get_title().get_text() == "participant"
    assert sorted(t.get_text() for t in key.get_texts()) == sorted(set(ids))
    assert "marker: participant" in text


def test_many_participants_share_a_marker_and_say_so():
    rng = np.random.default_rng(3)
    ids = np.repeat([f"P{i:02d}" for i in range(20)], 2)
    psg = rng.normal(400, 30, ids.size)
    act = psg + rng.normal(5, 10, ids.size)
    fig = bland_altman_figure(act, psg, agreement(act, psg, ids), parameter="TST", pair="actigraphy-psg",
                              unit="min", participant=ids)
    assert "20 participants share one marker" in _texts(fig)
    assert fig.axes[0].get_legend() is None


def test_confidence_default_is_the_agreement_tables():
    import inspect

    from sleepfuse.fusion.pairs import agreement_table

    assert inspect.signature(agreement_table).parameters["confidence"].default == CONFIDENCE


def test_p_below_one_in_a_thousand_is_printed_as_such():
    act, psg, ids = _proportional_case()
    stats = agreement(act, psg, ids)
    stats["prop_p"] = 3.6e-6  # the example
    text = _texts(bland_altman_figure(act, psg, stats, parameter="TST", pair="actigraphy-psg", unit="min",
                                      participant=ids))
    assert "(p < 0.001)" in text and "0.000" not in text


# The crossing limits of the statistics issue (tib_min, actigraphy − PSG): lower 86.17 − 0.2055·m,
# upper −4.58 + 0.0242·m; they cross at m = 90.75 / 0.2297 = 395.08.
CROSSING = {"reg_loa_intercept_low": 86.17, "reg_loa_slope_low": -0.2055,
            "reg_loa_intercept_high": -4.58, "reg_loa_slope_high": 0.0242}


def test_regression_limits_are_never_drawn_crossing():
    lo, hi = regression_limit_range(CROSSING, 360.0, 600.0)
    assert lo == pytest.approx(90.75 / 0.2297) and hi == 600.0
    assert regression_limit_range(CROSSING, 360.0, 390.0) is None
    # the statistics' own range wins; blank means: do not draw
    assert regression_limit_range({**CROSSING, "reg_loa_m_min": 400.0, "reg_loa_m_max": 500.0}, 360, 600) == (400, 500)
    assert regression_limit_range({**CROSSING, "reg_loa_m_min": float("nan"), "reg_loa_m_max": ""}, 360, 600) is None


def _crossing_case():
    rng = np.random.default_rng(11)
    psg = rng.uniform(360, 600, 30)
    act = psg + rng.normal(0, 5, 30)
    stats = agreement(act, psg)
    stats.update(CROSSING, prop_p=0.01, prop_slope=-0.09, prop_intercept=40.8)
    # a table of an earlier version, without the valid range of the regression-based limits
    stats.pop("reg_loa_m_min", None)
    stats.pop("reg_loa_m_max", None)
    return act, psg, stats


def test_figure_draws_regression_limits_only_where_upper_is_above_lower():
    act, psg, stats = _crossing_case()
    fig = bland_altman_figure(act, psg, stats, parameter="TIB", pair="actigraphy-psg", unit="min")
    dotted = [line for line in fig.axes[0].get_lines() if line.get_linestyle() == ":" and len(line.get_xdata())]
    assert len(dotted) == 2
    low, high = sorted(dotted, key=lambda line: line.get_ydata()[-1])
    xs = np.asarray(low.get_xdata(), float)
    assert xs.min() >= 90.75 / 0.2297 - 1e-6
    assert np.all(np.asarray(high.get_ydata(), float) >= np.asarray(low.get_ydata(), float) - 1e-9)
    assert "drawn where valid" in _texts(fig)
    stats.update(reg_loa_m_min=float("nan"), reg_loa_m_max=float("nan"))
    fig = bland_altman_figure(act, psg, stats, parameter="TIB", pair="actigraphy-psg", unit="min")
    assert not [line for line in fig.axes[0].get_lines() if line.get_linestyle() == ":" and len(line.get_xdata())]
    assert "regression-based limits not drawn" in _texts(fig)


def test_rows_identical_by_construction_are_not_drawn(tmp_path):
    import pandas as pd

    tib = np.array([450.0, 470.0, 480.0, 500.0])
    same = agreement(tib, tib, ["A", "B", "C", "D"])
    other = agreement(tib + [5, -3, 2, 8], tib, ["A", "B", "C", "D"])
    rows = [{"parameter": "tib_min", "pair": "diary-actigraphy", "unit": "min", **same, "by_construction": True},
            {"parameter": "tst_min", "pair": "diary-actigraphy", "unit": "min", **other, "by_construction": False}]
    table = pd.DataFrame(rows)
    assert [r["parameter"] for r in drawable_rows(table)] == ["tst_min"]
    # a table of earlier versions (no column): bias 0 and SD 0 on every night is judged the same way
    assert [r["parameter"] for r in drawable_rows(table.drop(columns="by_construction"))] == ["tst_min"]
    fig = bland_altman_figure(tib, tib, rows[0], parameter="TIB", pair="diary-actigraphy", unit="min")
    assert "Identical by construction" in _texts(fig)
    from sleepfuse.fusion.pairs import shared_parameters

    nights = pd.DataFrame({"participant": list("ABCD") * 2, "night": ["2026-01-01"] * 8,
                           "source": ["diary"] * 4 + ["actigraphy"] * 4, "included": True,
                           **{p: np.nan for p in shared_parameters("diary", "actigraphy")}})
    nights["tib_min"], nights["tst_min"] = np.r_[tib, tib], np.r_[tib + [5, -3, 2, 8], tib]
    steps = []
    written = write_plots({"agreement": table, "nights": nights}, tmp_path,
                          progress=lambda name, i, n: steps.append((name, i, n)))
    assert steps == [("diary-actigraphy_tst_min", 0, 1), ("", 1, 1)]
    assert sorted(p.name for p in written) == ["diary-actigraphy_tst_min.png", "diary-actigraphy_tst_min.svg"]


def test_corrected_limits_drawn_apart_with_their_bands_when_they_differ():
    act, psg, ids = _proportional_case()
    stats = agreement(act, psg, ids)
    stats.update(mn_loa_low=stats["loa_low"] - 15, mn_loa_high=stats["loa_high"] + 15)
    stats.update(mn_loa_low_ci_low=stats["mn_loa_low"] - 9, mn_loa_low_ci_high=stats["mn_loa_low"] + 9,
                 mn_loa_high_ci_low=stats["mn_loa_high"] - 9, mn_loa_high_ci_high=stats["mn_loa_high"] + 9)
    fig = bland_altman_figure(act, psg, stats, parameter="TST", pair="actigraphy-psg", unit="min", participant=ids)
    ax = fig.axes[0]
    dashed = [line for line in ax.get_lines() if line.get_linestyle() == "--" and len(line.get_ydata())]
    assert sorted(round(float(line.get_ydata()[0]), 6) for line in dashed) == sorted(
        round(stats[k], 6) for k in ("mn_loa_low", "mn_loa_high"))
    spans = [p.get_extents() for p in ax.patches]
    assert len(spans) == 1 + 2 + 2  # bias band, two limit bands, two corrected-limit bands
    assert "(not drawn: on the limits of agreement)" not in _texts(fig)


def test_skewed_parameter_gets_a_log_ratio_panel():
    rng = np.random.default_rng(5)
    psg = rng.lognormal(2.5, 0.6, 25)
    act = psg * rng.lognormal(-0.3, 0.3, 25)
    stats = agreement(act, psg, log_scale=True)
    assert np.isfinite(stats["ratio_gm"])
    fig = bland_altman_figure(act, psg, stats, parameter="SOL", pair="actigraphy-psg", unit="min")
    assert len(fig.axes) == 2
    ratio_ax = fig.axes[1]
    assert ratio_ax.get_yscale() == "log" and "log scale" in ratio_ax.get_title()
    for key in ("ratio_gm", "ratio_loa_low", "ratio_loa_high"):
        assert any(v == pytest.approx(stats[key]) for v in _levels(ratio_ax))
    text = _texts(fig)
    assert "geometric-mean ratio" in text and "ratio limits" in text
    assert all("10^" not in t.get_text() and "$" not in t.get_text() for t in ratio_ax.get_yticklabels())
    # without ratio limits (values <= 0), one panel only
    stats0 = agreement(np.r_[0.0, act[1:]], psg, log_scale=True)
    assert len(bland_altman_figure(np.r_[0.0, act[1:]], psg, stats0, parameter="SOL", pair="actigraphy-psg",
                                   unit="min").axes) == 1


def test_corrected_limits_a_line_width_away_are_named_not_drawn():
    act, psg, ids = _proportional_case()
    stats = agreement(act, psg, ids)
    span = stats["loa_high"] - stats["loa_low"]
    stats.update(mn_loa_low=stats["loa_low"] - 0.005 * span, mn_loa_high=stats["loa_high"] + 0.005 * span)
    fig = bland_altman_figure(act, psg, stats, parameter="TST", pair="actigraphy-psg", unit="min", participant=ids)
    assert not [line for line in fig.axes[0].get_lines() if line.get_linestyle() == "--" and len(line.get_ydata())]
    assert "(not drawn: on the limits of agreement)" in _texts(fig)


def test_figures_get_the_permissions_of_the_tables(tmp_path):
    """Interface issue: figures were written -rw------- (private) while tables were 0644."""
    import stat

    from sleepfuse.output.files import write_text

    act, psg, ids = _proportional_case()
    paths = save_figure(bland_altman_figure(act, psg, agreement(act, psg, ids), parameter="TST",
                                            pair="actigraphy-psg", unit="min", participant=ids), tmp_path / "f")
    table = write_text(tmp_path / "t.csv", "a\n")
    mode = stat.S_IMODE(table.stat().st_mode)
    assert mode & stat.S_IRGRP and mode & stat.S_IROTH  # colleagues can read the outputs
    assert all(stat.S_IMODE(p.stat().st_mode) == mode for p in paths)
