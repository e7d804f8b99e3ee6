"""Figures of the clustering preview: BIC curves, and the preferred solution on two leading variables.

Drawn with matplotlib's object-oriented API on the Agg canvas (no pyplot state, no
display needed over SSH); matplotlib is imported only when a figure is drawn.

The two leading variables of a solution with K ≥ 2 are the columns whose variance is
best explained by the clusters (posterior-weighted between-cluster share, an η²); for
K = 1 they are the two most skewed columns. Points are shown in the matrix's units (on
the ln(1 + x) scale for columns fitted that way), coloured by most likely cluster, with contours of the fitted mixture's marginal density.
"""

from __future__ import annotations

import textwrap
from pathlib import Path

import numpy as np
from scipy.special import log_ndtr
from scipy.stats import skew

from sleepfuse.output.files import write_with as write_atomic
from sleepfuse.explore.mixtures import preferred_fit
from sleepfuse.explore.selection import EXPLORATORY_CAUTION, BlockResult, ExploreResult
from sleepfuse.explore.skewnormal import LOG_2, gaussian_logpdf
from sleepfuse.explore.skewt import logpdf as skewt_logpdf
from sleepfuse.explore.studentt import logpdf as t_logpdf

FAMILY_STYLE = {"gaussian": ("#3b6ea8", "o", "Gaussian"), "skewnormal": ("#c2571a", "s", "skew-normal"),
                "t": ("#4c9a5b", "^", "multivariate t"), "skewt": ("#8a5aa8", "D", "skew-t")}
CLUSTER_COLOURS = ["#3b6ea8", "#c2571a", "#4c9a5b", "#8a5aa8", "#b8a030", "#5aa8a0", "#a85a6e", "#707070"]


def _new_figure(n_panels: int, width: float = 5.2, height: float = 4.2):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    cols = min(n_panels, 2)
    rows = int(np.ceil(n_panels / cols))
    fig = Figure(figsize=(width * cols, height * rows + 0.5), layout="constrained")
    FigureCanvasAgg(fig)
    axes = fig.subplots(rows, cols, squeeze=False).ravel()
    for ax in axes[n_panels:]:
        ax.set_visible(False)
    fig.get_layout_engine().set(h_pad=0.1)
    return fig, axes[:n_panels]


def _save(fig, stem: Path) -> list[Path]:
    width_chars = int(fig.get_figwidth() * 14)
    fig.suptitle(textwrap.fill(EXPLORATORY_CAUTION, width_chars), fontsize=8, color="#444444")
    out = []
    for fmt in ("png", "svg"):
        path = stem.with_suffix(f".{fmt}")
        write_atomic(path, lambda tmp, fmt=fmt: fig.savefig(tmp, format=fmt, dpi=120))
        out.append(path)
    return out


def bic_panels(result: ExploreResult) -> list[tuple[BlockResult, str]]:
    """(block, models.csv ``set``) of each BIC panel: the fitted set (all, selected or development), and
    with --holdout the validation sample too."""
    panels = []
    for block in result.blocks:
        panels.append((block, block.set_name))
        if block.holdout:
            panels.append((block, "validation"))
    return panels


def plot_bic(result: ExploreResult, stem: str | Path) -> list[Path]:
    """BIC against K for each family and block (with --holdout, one panel per sample); preferred model circled."""
    panels = bic_panels(result)
    fig, axes = _new_figure(len(panels))
    for ax, (block, set_name) in zip(axes, panels):
        table = block.models
        table = table[table["set"] == set_name]
        for family, rows in table.groupby("family", sort=False):
            colour, marker, label = FAMILY_STYLE[family]
            rows = rows.sort_values("K")
            ax.plot(rows["K"], rows["BIC"], marker=marker, color=colour, label=label)
        if set_name == "validation":
            fits, n = block.holdout.validation_fits, block.holdout.n_validation
        else:
            fits, n = block.fits, len(block.data.participants)
        best = preferred_fit(fits)
        if best is not None:
            ax.plot([best.n_components], [best.bic], marker="o", markersize=14, markerfacecolor="none",
                    markeredgecolor="black", linestyle="none",
                    label=f"preferred: {FAMILY_STYLE[best.family][2]}, K={best.n_components}")
        ax.set_xlabel("number of clusters K")
        ax.set_ylabel("BIC (lower is better)")
        sample = f" ({set_name} sample)" if block.holdout else ""
        ax.set_title(f"{block.name}{sample}: {n} participants, {len(block.data.columns)} column(s)", fontsize=10)
        ax.xaxis.get_major_locator().set_params(integer=True)
        ax.grid(alpha=0.3)
        if best is None:
            ax.text(0.5, 0.5, "no model could be fitted\n(see models.csv, column message)", ha="center",
                    va="center", transform=ax.transAxes)
        if ax.get_legend_handles_labels()[0]:
            ax.legend(fontsize=8)
    return _save(fig, Path(stem))


def leading_variables(block: BlockResult) -> list[int]:
    """Indices of the (up to) two columns that carry the preferred solution; see the module docstring."""
    z = block.data.z
    d = z.shape[1]
    best = block.preferred
    if d <= 2:
        return list(range(d))
    if best is None or best.n_components == 1:
        score = np.abs(np.nan_to_num(skew(z, axis=0)))
    else:
        post = best.posterior(z)
        nk = post.sum(axis=0)
        centres = (post.T @ z) / nk[:, None]
        between = np.sum(nk[:, None] * (centres - z.mean(axis=0)) ** 2, axis=0)
        score = between / np.sum((z - z.mean(axis=0)) ** 2, axis=0)
    return [int(i) for i in np.argsort(-score, kind="stable")[:2]]


def _marginal_log_density(block: BlockResult, idx: list[int], z: np.ndarray) -> np.ndarray:
    """Log-density of the preferred mixture's marginal on columns ``idx`` (the skew-normal family is
    closed under marginalisation: ξ_s, Δ_s, Γ_ss; Azzalini & Dalla Valle 1996; so is the t, with
    the same ν: μ_s, Σ_ss; Kotz & Nadarajah 2004, *Multivariate t Distributions and Their Applications*)."""
    best = block.preferred
    parts = []
    nus = best.dofs if best.dofs is not None else [None] * best.n_components
    for w, xi, gamma, delta, nu in zip(best.weights, best.locations, best.gammas, best.deltas, nus):
        xs, gs, ds = xi[idx], gamma[np.ix_(idx, idx)], delta[idx]
        sigma = gs + np.outer(ds, ds)
        if nu is not None and np.any(ds):       # the restricted skew-t: same representation on the margin
            parts.append(np.log(w) + skewt_logpdf(z, xs, gs, ds, nu))
            continue
        log_f = gaussian_logpdf(z, xs, sigma) if nu is None else t_logpdf(z, xs, sigma, nu)
        if np.any(ds):
            wv = np.linalg.solve(sigma, ds)
            log_f = log_f + LOG_2 + log_ndtr(((z - xs) @ wv) / np.sqrt(max(1.0 - ds @ wv, 1e-300)))
        parts.append(np.log(w) + log_f)
    stacked = np.stack(parts, axis=1)
    top = stacked.max(axis=1, keepdims=True)
    return (top + np.log(np.exp(stacked - top).sum(axis=1, keepdims=True)))[:, 0]


def _draw_solution(ax, block: BlockResult) -> None:
    best = block.preferred
    if best is None:
        ax.text(0.5, 0.5, f"{block.name}: no model could be fitted", ha="center", va="center",
                transform=ax.transAxes)
        ax.set_axis_off()
        return
    idx = leading_variables(block)
    data = block.data
    labels = best.posterior(data.z).argmax(axis=1)
    colours = [CLUSTER_COLOURS[k % len(CLUSTER_COLOURS)] for k in range(best.n_components)]
    raw = data.raw[:, idx]
    title = f"{block.name}: {FAMILY_STYLE[best.family][2]}, K={best.n_components}, n={len(data.participants)}"
    if len(idx) == 1:
        ax.hist([raw[labels == k, 0] for k in range(best.n_components)], bins=20, stacked=True,
                color=colours, label=[f"cluster {k + 1}" for k in range(best.n_components)])
        grid = np.linspace(raw.min(), raw.max(), 200)
        zg = ((grid - data.means[idx[0]]) / data.sds[idx[0]])[:, None]
        dens = np.exp(_marginal_log_density(block, idx, zg)) / data.sds[idx[0]]
        width = (raw.max() - raw.min()) / 20 if raw.max() > raw.min() else 1.0
        ax.plot(grid, dens * len(raw) * width, color="black", linewidth=1.2, label="fitted density")
        ax.set_xlabel(data.label(data.columns[idx[0]]))
        ax.set_ylabel("participants")
    else:
        pad = 0.08 * (raw.max(axis=0) - raw.min(axis=0))
        gx = np.linspace(raw[:, 0].min() - pad[0], raw[:, 0].max() + pad[0], 120)
        gy = np.linspace(raw[:, 1].min() - pad[1], raw[:, 1].max() + pad[1], 120)
        mx, my = np.meshgrid(gx, gy)
        zg = (np.column_stack([mx.ravel(), my.ravel()]) - data.means[idx]) / data.sds[idx]
        dens = np.exp(_marginal_log_density(block, idx, zg)).reshape(mx.shape)
        ax.contour(mx, my, dens, levels=6, colors="#555555", linewidths=0.7, alpha=0.8)
        for k in range(best.n_components):
            members = raw[labels == k]
            ax.scatter(members[:, 0], members[:, 1], s=16, color=colours[k], alpha=0.85,
                       edgecolors="white", linewidths=0.4, label=f"cluster {k + 1} (n={len(members)})")
        ax.set_xlabel(data.label(data.columns[idx[0]]))
        ax.set_ylabel(data.label(data.columns[idx[1]]))
    ax.set_title(title, fontsize=10)
    ax.grid(alpha=0.3)
    ax.legend(fontsize=8)


def plot_solution(result: ExploreResult, stem: str | Path) -> list[Path]:
    """The preferred solution of each block on its two leading variables, in the matrix's units."""
    fig, axes = _new_figure(len(result.blocks))
    for ax, block in zip(axes, result.blocks):
        _draw_solution(ax, block)
    return _save(fig, Path(stem))
