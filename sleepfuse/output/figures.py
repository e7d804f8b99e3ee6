"""Bland–Altman figures (Bland & Altman 1986, Lancet i:307–310) for the plots folder and the report.

Figures are built with matplotlib's object API on the Agg backend, never
through pyplot state, so they can be drawn in batch runs and worker threads.
matplotlib is imported only when a figure is made. Every number is printed
by ``sleepfuse.model.numbers``, with the typographic minus matplotlib puts on the axes. Rows of agreement.csv that agree by construction
(``by_construction``) are never drawn.
"""

from __future__ import annotations

import math
import sys
from pathlib import Path
from typing import Callable

import numpy as np

from sleepfuse.fusion.agreement import MIN_PAIRS
from sleepfuse.model import numbers
from sleepfuse.output.agreement_rows import (by_construction, confidence_of, corrected_on_ordinary,
                                             drawable_rows, has_values, interval_text, number_text,
                                             proportional_bias_flagged, regression_limit_range, stat_value)
from sleepfuse.output.files import atomic_path, write_text

_SOURCE_LABELS = {"psg": "PSG", "actigraphy": "actigraphy", "diary": "diary"}
_MARKERS = "osD^v<>pP*Xh"
_DOT_COLOUR = "#1f4e79"
_LOA_COLOUR = "#b2182b"
_MN_COLOUR = "#7a3b8f"
_REG_COLOUR = "#2b8a3e"


def _matplotlib():
    """Import matplotlib on Agg (left alone when a session already chose a pyplot backend)."""
    import matplotlib

    if "matplotlib.pyplot" not in sys.modules:
        matplotlib.use("Agg")
    from matplotlib.figure import Figure

    return matplotlib, Figure


def pair_labels(pair: str) -> tuple[str, str]:
    """'actigraphy-psg' -> ('actigraphy', 'PSG')."""
    test, _, reference = pair.partition("-")
    return (_SOURCE_LABELS.get(test, test or "test"),
            _SOURCE_LABELS.get(reference, reference or "reference"))


def _ratio_ready(stats: dict, x: np.ndarray, y: np.ndarray) -> bool:
    return has_values(stats, "ratio_gm", "ratio_loa_low", "ratio_loa_high") and bool(np.all(x > 0) and np.all(y > 0))


def bland_altman_figure(test, reference, stats: dict, *, parameter: str, pair: str, unit: str,
                        participant=None):
    """Bland–Altman plot of test − reference against the pair mean, one point per night.

    Draws the bias and limits of agreement with their CIs as shaded bands
    (Bland & Altman 1999, Stat Methods Med Res 8:135–160), the regression of
    the difference on the mean when proportional bias is flagged, with the
    regression-based limits only where they do not cross, and the limits
    corrected for repeated nights (Bland & Altman 2007) dashed, or named in
    the legend when they lie on the ordinary ones. Skewed parameters with
    ratio limits get a second panel: test/reference on a log axis with the
    geometric-mean ratio and the ratio limits. ``stats`` is a row of
    agreement.csv; rows agreeing by construction give a figure that says so.
    """
    _, Figure = _matplotlib()
    x = np.asarray(test, dtype=float).ravel()
    y = np.asarray(reference, dtype=float).ravel()
    keep = np.isfinite(x) & np.isfinite(y)
    ids = None if participant is None else np.asarray(participant, dtype=object).ravel()[keep]
    x, y = x[keep], y[keep]
    test_label, ref_label = pair_labels(pair)
    title = f"{parameter}: {test_label} vs {ref_label}"
    n_nights = int(stat_value(stats, "n_nights")) if has_values(stats, "n_nights") else x.size
    n_participants = (int(stat_value(stats, "n_participants")) if has_values(stats, "n_participants")
                      else x.size if ids is None else len(set(ids)))
    message = None
    if by_construction(stats):
        message = "Identical by construction\n(both sources share this value): not drawn"
    elif n_nights < MIN_PAIRS or x.size < MIN_PAIRS or not has_values(stats, "bias", "sd"):
        message = f"Fewer than {MIN_PAIRS} paired nights (n = {n_nights}):\nno Bland–Altman plot"
    if message:
        fig = Figure(figsize=(7.0, 5.4), layout="constrained")
        ax = fig.add_subplot()
        ax.set_title(title, fontsize=12)
        ax.set_axis_off()
        ax.text(0.5, 0.5, message, ha="center", va="center", fontsize=12, transform=ax.transAxes)
        return fig

    ratio = _ratio_ready(stats, x, y)
    fig = Figure(figsize=(11.5 if ratio else 7.6, 6.0), layout="constrained")
    axes = fig.subplots(1, 2, width_ratios=[3, 2]) if ratio else [fig.add_subplot()]
    ax = axes[0]
    mean = (x + y) / 2.0
    diff = x - y
    groups = _marker_groups(ids)
    for marker, pid, sel in groups:
        ax.scatter(mean[sel], diff[sel], s=24, marker=marker, color=_DOT_COLOUR, alpha=0.75,
                   linewidths=0, zorder=3, label=pid)
    span = np.ptp(mean) if np.ptp(mean) > 0 else max(abs(mean.mean()), 1.0)
    xs = np.array([mean.min() - 0.05 * span, mean.max() + 0.05 * span])
    ax.axhline(0.0, color="0.6", lw=0.8, zorder=1)
    level = numbers.format_level(confidence_of(stats))
    lines = _draw_limits(ax, stats, xs, level, diff)
    ax.set_xlim(*xs)
    unit_text = f" ({unit})" if unit else ""
    ax.set_title(title, fontsize=12)
    ax.set_xlabel(f"Mean of {test_label} and {ref_label}{unit_text}")
    ax.set_ylabel(f"{test_label} − {ref_label}{unit_text}")
    _tidy(ax)
    if ratio:
        lines += _draw_ratio_panel(axes[1], x, y, mean, stats, groups, test_label, ref_label, unit_text)
    if len(groups) > 1:
        ax.legend(title="participant", loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize=7,
                  title_fontsize=7, frameon=False, handletextpad=0.2, borderaxespad=0.0)
        marks = "one point per night; marker: participant (key beside the plot)"
    elif ids is not None and len(set(ids)) > len(_MARKERS):
        marks = f"one point per night; {len(set(ids))} participants share one marker"
    else:
        marks = "one point per night"
    caption = (f"n = {n_nights} nights, {n_participants} participants; {marks}; "
               f"shaded bands: {level} CI")
    handles, labels = zip(*lines) if lines else ((), ())
    fig.legend(handles, labels, loc="outside lower center", ncol=2 if ratio else 1, fontsize=8, frameon=False,
               title=caption, title_fontsize=8)
    return fig


def _marker_groups(ids) -> list[tuple[str, str, np.ndarray]]:
    """(marker, participant, selection) per participant when each can have its own marker, else one group."""
    if ids is None:
        return [("o", "night", slice(None))]
    distinct = sorted(set(ids), key=str)
    if 1 < len(distinct) <= len(_MARKERS):
        return [(m, str(pid), ids == pid) for m, pid in zip(_MARKERS, distinct)]
    return [("o", "night", np.ones(ids.size, dtype=bool))]


def _tidy(ax) -> None:
    ax.spines[["top", "right"]].set_visible(False)
    ax.tick_params(labelsize=9)


def _draw_limits(ax, stats: dict, xs: np.ndarray, level: str, diff: np.ndarray) -> list:
    """Bias, limits (ordinary, corrected, regression-based) and the bands; returns (handle, label) pairs."""
    fmt = number_text
    out = []

    def band(lo_key: str, hi_key: str, colour: str) -> None:
        if has_values(stats, lo_key, hi_key):
            ax.axhspan(stat_value(stats, lo_key), stat_value(stats, hi_key), color=colour, alpha=0.12, lw=0, zorder=0)

    bias_ci = interval_text(stats.get("bias_ci_low"), stats.get("bias_ci_high"))
    h = ax.axhline(stat_value(stats, "bias"), color="black", lw=1.6, zorder=2)
    out.append((h, f"bias {fmt(stats.get('bias'))} ({level} CI {bias_ci})"))
    band("bias_ci_low", "bias_ci_high", "black")
    if has_values(stats, "loa_low", "loa_high"):
        h = ax.axhline(stat_value(stats, "loa_low"), color=_LOA_COLOUR, lw=1.2, ls="-.", zorder=2)
        ax.axhline(stat_value(stats, "loa_high"), color=_LOA_COLOUR, lw=1.2, ls="-.", zorder=2)
        out.append((h, f"limits of agreement {fmt(stats.get('loa_low'))} to {fmt(stats.get('loa_high'))}"))
        band("loa_low_ci_low", "loa_low_ci_high", _LOA_COLOUR)
        band("loa_high_ci_low", "loa_high_ci_high", _LOA_COLOUR)
    if has_values(stats, "mn_loa_low", "mn_loa_high"):
        values = [v for v in (stat_value(stats, k) for k in ("loa_low", "loa_high", "mn_loa_low", "mn_loa_high"))
                  if math.isfinite(v)]
        span = max(float(np.ptp(np.concatenate([diff, values]))), 1e-12)
        text = f"{fmt(stats.get('mn_loa_low'))} to {fmt(stats.get('mn_loa_high'))}"
        if corrected_on_ordinary(stats, span):
            h = ax.plot([], [], color=_MN_COLOUR, lw=1.2, ls="--")[0]
            out.append((h, f"corrected for repeated nights {text} (not drawn: on the limits of agreement)"))
        else:
            h = ax.axhline(stat_value(stats, "mn_loa_low"), color=_MN_COLOUR, lw=1.2, ls="--", zorder=2)
            ax.axhline(stat_value(stats, "mn_loa_high"), color=_MN_COLOUR, lw=1.2, ls="--", zorder=2)
            out.append((h, f"corrected for repeated nights {text}"))
            band("mn_loa_low_ci_low", "mn_loa_low_ci_high", _MN_COLOUR)
            band("mn_loa_high_ci_low", "mn_loa_high_ci_high", _MN_COLOUR)
    if proportional_bias_flagged(stats):
        slope = stat_value(stats, "prop_slope")
        h = ax.plot(xs, stat_value(stats, "prop_intercept") + slope * xs, color=_REG_COLOUR, lw=1.4, zorder=2)[0]
        out.append((h, f"proportional bias: slope {number_text(slope, 2)} "
                       f"({numbers.format_p_text(stats.get('prop_p'))})"))
        where = regression_limit_range(stats, float(xs[0]), float(xs[1]))
        if where is not None:
            m = np.array(where)
            for side in ("low", "high"):
                h = ax.plot(m, stat_value(stats, f"reg_loa_intercept_{side}") + stat_value(stats, f"reg_loa_slope_{side}") * m,
                            color=_REG_COLOUR, lw=1.0, ls=":", zorder=2)[0]
            clipped = where[0] > xs[0] + 1e-9 or where[1] < xs[1] - 1e-9
            out.append((h, "regression-based limits" + (
                f" (drawn where valid: mean {fmt(where[0])} to {fmt(where[1])})" if clipped else "")))
        elif has_values(stats, "reg_loa_intercept_low", "reg_loa_intercept_high"):
            h = ax.plot([], [], color=_REG_COLOUR, lw=1.0, ls=":")[0]
            out.append((h, "regression-based limits not drawn: they cross in this range"))
    return out


def _draw_ratio_panel(ax, x, y, mean, stats, groups, test_label, ref_label, unit_text) -> list:
    """Ratio test/reference against the mean on a log axis: geometric-mean ratio and ratio limits."""
    fmt = number_text
    ratio = x / y
    for marker, _, sel in groups:
        ax.scatter(mean[sel], ratio[sel], s=24, marker=marker, color=_DOT_COLOUR, alpha=0.75,
                   linewidths=0, zorder=3)
    ax.set_yscale("log")
    _plain_log_ticks(ax, np.concatenate([ratio, [stat_value(stats, k) for k in ("ratio_loa_low", "ratio_loa_high")]]))
    ax.axhline(1.0, color="0.6", lw=0.8, zorder=1)
    h_gm = ax.axhline(stat_value(stats, "ratio_gm"), color="black", lw=1.6, ls=(0, (6, 2)), zorder=2)
    h_lim = ax.axhline(stat_value(stats, "ratio_loa_low"), color=_LOA_COLOUR, lw=1.2, ls=(0, (1, 1)), zorder=2)
    ax.axhline(stat_value(stats, "ratio_loa_high"), color=_LOA_COLOUR, lw=1.2, ls=(0, (1, 1)), zorder=2)
    ax.set_title(f"ratio {test_label} / {ref_label} (log scale)", fontsize=11)
    ax.set_xlabel(f"Mean of {test_label} and {ref_label}{unit_text}")
    ax.set_ylabel(f"{test_label} / {ref_label}")
    _tidy(ax)
    return [(h_gm, f"geometric-mean ratio {fmt(stats.get('ratio_gm'), 2)}"),
            (h_lim, f"ratio limits {fmt(stats.get('ratio_loa_low'), 2)} to {fmt(stats.get('ratio_loa_high'), 2)}")]


def _plain_log_ticks(ax, values: np.ndarray) -> None:
    """Ticks of a log axis at 1-2-5 steps, printed as plain numbers (0.2, 0.5, 1, 2), not powers of ten."""
    from matplotlib.ticker import FixedLocator, NullLocator

    lo, hi = float(np.nanmin(values)), float(np.nanmax(values))
    steps = [m * 10.0 ** e for e in range(-4, 5) for m in (1, 2, 5)]
    ticks = [t for t in steps if lo / 1.3 <= t <= hi * 1.3] or [1.0]
    ax.yaxis.set_major_locator(FixedLocator(ticks))
    ax.yaxis.set_minor_locator(NullLocator())
    ax.set_yticklabels([f"{t:g}" for t in ticks])


def figure_of_row(nights, stats: dict):
    """The Bland–Altman figure of one agreement row, its nights taken from the night table."""
    import pandas as pd

    from sleepfuse.model.definitions import label_of
    from sleepfuse.fusion.pairs import paired_nights

    test, _, reference = str(stats["pair"]).partition("-")
    param = stats["parameter"]
    paired = paired_nights(nights, test, reference) if not nights.empty else pd.DataFrame()
    if paired.empty or f"{param}_test" not in paired:
        t = r = ids = np.array([], dtype=float)
    else:
        t, r = paired[f"{param}_test"].to_numpy(float), paired[f"{param}_ref"].to_numpy(float)
        ids = paired["participant"].to_numpy(object)
    unit = stats.get("unit")
    unit = unit if isinstance(unit, str) else ""
    return bland_altman_figure(t, r, stats, parameter=label_of(param), pair=stats["pair"], unit=unit,
                               participant=ids)


def write_plots(tables: dict, out: Path, progress: Callable[[str, int, int], None] | None = None,
                svgs: dict | None = None) -> list[Path]:
    """One Bland–Altman figure (PNG + SVG) per parameter and pair into out/plots/; ``progress(name, i, n)``.

    ``svgs``, when given, receives each figure's SVG text by (pair, parameter), for the report.
    """
    rows = list(drawable_rows(tables["agreement"]))
    written: list[Path] = []
    for i, stats in enumerate(rows):
        name = f"{stats['pair']}_{stats['parameter']}"
        if progress:
            progress(name, i, len(rows))
        paths = save_figure(figure_of_row(tables["nights"], stats), Path(out) / "plots" / name)
        if svgs is not None:
            svgs[(stats["pair"], stats["parameter"])] = paths[1].read_text(encoding="utf-8")
        written += paths
    if progress:
        progress("", len(rows), len(rows))
    return written


def _atomic_save(fig, target: Path, fmt: str, **kwargs) -> Path:
    with atomic_path(target) as tmp:
        with open(tmp, "wb") as handle:
            fig.savefig(handle, format=fmt, **kwargs)
    return target


def svg_text(fig) -> str:
    """The figure as SVG text (text kept as text, no date, stable ids), for the report."""
    import io

    matplotlib, _ = _matplotlib()
    buf = io.StringIO()
    with matplotlib.rc_context({"svg.fonttype": "none", "svg.hashsalt": "sleepfuse"}):
        fig.savefig(buf, format="svg", metadata={"Date": None})
    return buf.getvalue()


def save_figure(fig, path_without_suffix: Path) -> list[Path]:
    """Write the figure as PNG (200 dpi) and SVG (text kept as text), each atomically.

    Suffixes are appended, not substituted, so names with dots survive.
    Returns the two paths written.
    """
    base = Path(path_without_suffix)
    base.parent.mkdir(parents=True, exist_ok=True)
    png = _atomic_save(fig, Path(f"{base}.png"), "png", dpi=200)
    svg = write_text(Path(f"{base}.svg"), svg_text(fig))
    return [png, svg]
