"""Bland–Altman figures: content of the drawing and the files written."""

from __future__ import annotations

import subprocess
import sys

import numpy as np
import pytest

from sleepfuse.fusion.agreement import agreement
from sleepfuse.output.figures import bland_altman_figure, save_figure


def _proportional_case():
    """Invented study: 10 participants, 1-4 nights each, actigraphy TST inflating with TST."""
    rng = np.random.default_rng(6)
    nights = rng.integers(1, 5, 10)
    ids = np.repeat([f"P{i:02d}" for i in range(10)], nights)
    group = np.repeat(np.arange(10), nights)
    psg = rng.normal(390, 45, 10)[group] + rng.normal(0, 15, ids.size)
    act = psg * 1.2 - 50 + rng.normal(0, 10, ids.size) + (group % 3) * 12
    return act, psg, ids


def _texts(fig) -> str:
    ax = fig.axes[0]
    parts = [ax.get_title(), ax.get_xlabel(), ax.get_ylabel()]
    parts += [t.get_text() for t in ax.texts]
    legend = ax.get_legend()
    if legend is not None:
        parts += [t.get_text() for t in legend.get_texts()] + [legend.get_title().get_text()]
    return "\n".join(parts)


def test_proportional_bias_figure_has_all_elements():
    act, psg, ids = _proportional_case()
    stats = agreement(act, psg, ids)
    assert stats["prop_p"] < 0.05 and stats["mn_sd"] != pytest.approx(stats["sd"])
    fig = bland_altman_figure(act, psg, stats, parameter="TST", pair="actigraphy-psg",
                              unit="min", participant=ids)
    ax = fig.axes[0]
    text = _texts(fig)
    assert ax.get_xlabel() == "Mean of actigraphy and PSG (min)"
    assert ax.get_ylabel() == "actigraphy − PSG (min)"
    assert "TST" in ax.get_title() and "actigraphy vs PSG" in ax.get_title()
    assert f"n = {ids.size} nights, 10 participants" in text
    assert "difference on mean" in text and "corrected for repeated nights" in text
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
    assert "difference on mean" not in text and "corrected for repeated nights" not in text
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
