"""Bland–Altman figures (Bland & Altman 1986, Lancet i:307–310) for agreement reports.

Figures are built with matplotlib's object API on the Agg backend, never
through pyplot state, so they can be drawn in batch runs and worker threads.
matplotlib is imported only when a figure is made.
"""

from __future__ import annotations

import math
import os
import sys
import tempfile
from pathlib import Path

import numpy as np

from sleepfuse.fusion.agreement import MIN_PAIRS, PROPORTIONAL_P

_SOURCE_LABELS = {"psg": "PSG", "actigraphy": "actigraphy", "diary": "diary"}
_MARKERS = "osD^v<>p"
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


def _pair_labels(pair: str) -> tuple[str, str]:
    """'actigraphy-psg' -> ('actigraphy', 'PSG')."""
    test, _, reference = pair.partition("-")
    return (_SOURCE_LABELS.get(test, test or "test"),
            _SOURCE_LABELS.get(reference, reference or "reference"))


def _fmt(value: float) -> str:
    return "n/a" if value is None or not np.isfinite(value) else f"{value:.1f}".replace("-", "−")


def _finite(stats: dict, *keys: str) -> bool:
    return all(isinstance(stats.get(k), (int, float)) and math.isfinite(stats[k]) for k in keys)


def bland_altman_figure(test, reference, stats: dict, *, parameter: str, pair: str, unit: str,
                        participant=None):
    """Bland–Altman plot of test − reference against the pair mean, one point per night.

    Draws the bias and limits of agreement with their CIs as shaded bands
    (Bland & Altman 1999, Stat Methods Med Res 8:135–160), the regression of
    the difference on the mean when proportional bias has p < 0.05, and the
    multi-night corrected limits (Bland & Altman 2007) dashed when they
    differ from the naive ones. ``stats`` is a row from ``agreement``.
    """
    _, Figure = _matplotlib()
    x = np.asarray(test, dtype=float).ravel()
    y = np.asarray(reference, dtype=float).ravel()
    keep = np.isfinite(x) & np.isfinite(y)
    ids = None if participant is None else np.asarray(participant, dtype=object).ravel()[keep]
    x, y = x[keep], y[keep]
    test_label, ref_label = _pair_labels(pair)
    unit_text = f" ({unit})" if unit else ""
    fig = Figure(figsize=(7.0, 5.4), layout="constrained")
    ax = fig.add_subplot()
    ax.set_title(f"{parameter}: {test_label} vs {ref_label}", fontsize=12)
    n_nights = int(stats.get("n_nights", x.size))
    n_participants = int(stats.get("n_participants", x.size if ids is None else len(set(ids))))
    if n_nights < MIN_PAIRS or x.size < MIN_PAIRS or not _finite(stats, "bias", "sd"):
        ax.set_axis_off()
        ax.text(0.5, 0.5, f"Fewer than {MIN_PAIRS} paired nights (n = {n_nights}):\n"
                "no Bland–Altman plot", ha="center", va="center", fontsize=12,
                transform=ax.transAxes)
        return fig

    mean = (x + y) / 2.0
    diff = x - y
    if ids is not None and 1 < len(set(ids)) <= len(_MARKERS):
        for i, (marker, pid) in enumerate(zip(_MARKERS, sorted(set(ids), key=str))):
            sel = ids == pid
            ax.scatter(mean[sel], diff[sel], s=22, marker=marker, color=_DOT_COLOUR,
                       alpha=0.75, linewidths=0, zorder=3,
                       label="night (marker per participant)" if i == 0 else None)
    else:
        ax.scatter(mean, diff, s=22, color=_DOT_COLOUR, alpha=0.75, linewidths=0, zorder=3,
                   label="night")

    span = np.ptp(mean) if np.ptp(mean) > 0 else max(abs(mean.mean()), 1.0)
    xs = np.array([mean.min() - 0.05 * span, mean.max() + 0.05 * span])
    ax.axhline(0.0, color="0.6", lw=0.8, zorder=1)

    def band(lo_key: str, hi_key: str, colour: str) -> None:
        if _finite(stats, lo_key, hi_key):
            ax.axhspan(stats[lo_key], stats[hi_key], color=colour, alpha=0.12, lw=0, zorder=0)

    ax.axhline(stats["bias"], color="black", lw=1.4, zorder=2,
               label=f"bias {_fmt(stats['bias'])} (CI {_fmt(stats.get('bias_ci_low'))} "
                     f"to {_fmt(stats.get('bias_ci_high'))})")
    band("bias_ci_low", "bias_ci_high", "black")
    if _finite(stats, "loa_low", "loa_high"):
        ax.axhline(stats["loa_low"], color=_LOA_COLOUR, lw=1.2, zorder=2,
                   label=f"limits of agreement {_fmt(stats['loa_low'])} to "
                         f"{_fmt(stats['loa_high'])}")
        ax.axhline(stats["loa_high"], color=_LOA_COLOUR, lw=1.2, zorder=2)
        band("loa_low_ci_low", "loa_low_ci_high", _LOA_COLOUR)
        band("loa_high_ci_low", "loa_high_ci_high", _LOA_COLOUR)
    if _finite(stats, "mn_loa_low", "mn_loa_high", "mn_sd") and not math.isclose(
        stats["mn_sd"], stats["sd"], rel_tol=1e-9
    ):
        ax.axhline(stats["mn_loa_low"], color=_MN_COLOUR, lw=1.2, ls="--", zorder=2,
                   label=f"corrected for repeated nights {_fmt(stats['mn_loa_low'])} to "
                         f"{_fmt(stats['mn_loa_high'])}")
        ax.axhline(stats["mn_loa_high"], color=_MN_COLOUR, lw=1.2, ls="--", zorder=2)
    p = stats.get("prop_p", float("nan"))
    if _finite(stats, "prop_slope", "prop_intercept", "prop_p") and p < PROPORTIONAL_P:
        ax.plot(xs, stats["prop_intercept"] + stats["prop_slope"] * xs, color=_REG_COLOUR,
                lw=1.3, zorder=2,
                label=f"difference on mean: slope {stats['prop_slope']:.2f} (p = {p:.2g})"
                .replace("-", "−"))
        if _finite(stats, "reg_loa_intercept_low", "reg_loa_slope_low",
                   "reg_loa_intercept_high", "reg_loa_slope_high"):
            for side in ("low", "high"):
                ax.plot(xs, stats[f"reg_loa_intercept_{side}"] + stats[f"reg_loa_slope_{side}"] * xs,
                        color=_REG_COLOUR, lw=1.0, ls=":", zorder=2,
                        label="regression-based limits" if side == "low" else None)

    ax.set_xlim(*xs)
    ax.set_xlabel(f"Mean of {test_label} and {ref_label}{unit_text}")
    ax.set_ylabel(f"{test_label} − {ref_label}{unit_text}")
    ax.spines[["top", "right"]].set_visible(False)
    ax.tick_params(labelsize=9)
    caption = f"n = {n_nights} nights, {n_participants} participants; shaded bands: confidence intervals"
    ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.14), ncol=2, fontsize=8,
              frameon=False, title=caption, title_fontsize=8)
    return fig


def _atomic_save(fig, target: Path, fmt: str, **kwargs) -> Path:
    fd, tmp = tempfile.mkstemp(dir=target.parent, prefix=f".{target.name}.", suffix=".tmp")
    try:
        with os.fdopen(fd, "wb") as handle:
            fig.savefig(handle, format=fmt, **kwargs)
        os.replace(tmp, target)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
    return target


def save_figure(fig, path_without_suffix: Path) -> list[Path]:
    """Write the figure as PNG (200 dpi) and SVG (text kept as text), each atomically.

    Suffixes are appended, not substituted, so names with dots survive.
    Returns the two paths written.
    """
    matplotlib, _ = _matplotlib()
    base = Path(path_without_suffix)
    base.parent.mkdir(parents=True, exist_ok=True)
    png = _atomic_save(fig, Path(f"{base}.png"), "png", dpi=200)
    with matplotlib.rc_context({"svg.fonttype": "none", "svg.hashsalt": "sleepfuse"}):
        svg = _atomic_save(fig, Path(f"{base}.svg"), "svg", metadata={"Date": None})
    return [png, svg]
