"""A Bland–Altman scatter drawn in text cells: mean of the two instruments across, difference up.

Bias is a solid line, the limits of agreement dashed (Bland & Altman 1986,
Lancet 1:307-310). One point is selected (shown as ◆ and in reverse video);
the screen moves the selection and opens its night.
"""

from __future__ import annotations

import math

import numpy as np
from rich.text import Text
from textual.widget import Widget

from sleepfuse.model.numbers import format_number

YGUTTER = 8


def scatter_rows(mean: np.ndarray, diff: np.ndarray, bias: float, low: float, high: float,
                 width: int, height: int, selected: int | None, *, line: tuple[float, float] | None = None,
                 x_label: str = "mean of the two", y_label: str = "") -> list[Text]:
    """Rows of the plot: the y label, y values in a gutter, points, bias and limit lines, the x axis and its label.

    ``line`` (intercept, slope) is the regression of the difference on the mean,
    drawn as ╱ or ╲ where proportional bias is flagged (Bland & Altman 1999).
    """
    plot_w, plot_h = max(width - YGUTTER, 10), max(height - 3, 4)
    ys = [v for v in (*diff, bias, low, high) if np.isfinite(v)]
    if mean.size == 0 or not ys:
        return [Text("no paired nights for this parameter and pair", style="dim")]
    y_lo, y_hi = min(ys), max(ys)
    span = (y_hi - y_lo) or 1.0
    y_lo, y_hi = y_lo - 0.08 * span, y_hi + 0.08 * span
    x_lo, x_hi = float(np.min(mean)), float(np.max(mean))
    xspan = (x_hi - x_lo) or 1.0
    x_lo, x_hi = x_lo - 0.04 * xspan, x_hi + 0.04 * xspan

    def row_of(y: float) -> int:
        return int(round((y_hi - y) / (y_hi - y_lo) * (plot_h - 1)))

    def col_of(x: float) -> int:
        return int(round((x - x_lo) / (x_hi - x_lo) * (plot_w - 1)))

    grid = [[" "] * plot_w for _ in range(plot_h)]
    styles = [[""] * plot_w for _ in range(plot_h)]
    labels: dict[int, str] = {}
    for value, glyph, name, style in ((low, "╌", "LoA", "red"), (high, "╌", "LoA", "red"), (bias, "─", "bias", "yellow")):
        if np.isfinite(value):
            r = row_of(value)
            grid[r] = [glyph] * plot_w
            styles[r] = [style] * plot_w
            labels[r] = format_number(value, 1, signed=True)
    if line is not None:
        a, b = line
        glyph = "╱" if b > 0 else "╲"
        for c in range(plot_w):
            y = a + b * (x_lo + (c + 0.5) / plot_w * (x_hi - x_lo))
            if y_lo <= y <= y_hi and grid[row_of(y)][c] == " ":
                grid[row_of(y)][c], styles[row_of(y)][c] = glyph, "cyan"
    zero = row_of(0.0) if y_lo < 0 < y_hi else None
    if zero is not None and zero not in labels:
        grid[zero] = ["·"] * plot_w
        labels[zero] = "0"
    for i, (x, y) in enumerate(zip(mean, diff)):
        r, c = row_of(y), col_of(x)
        grid[r][c] = "●" if grid[r][c] in ("•", "●") else "•"
        styles[r][c] = "bold"
    if selected is not None and 0 <= selected < mean.size:
        r, c = row_of(diff[selected]), col_of(mean[selected])
        grid[r][c] = "◆"
        styles[r][c] = "bold reverse"
    rows = [Text(f"{'':>{YGUTTER - 1}} {y_label}" + ("   ╱ proportional bias" if line is not None else ""),
                 style="dim")]
    for r in range(plot_h):
        line = Text(f"{labels.get(r, ''):>{YGUTTER - 1}}│", style="dim")
        for ch, st in zip(grid[r], styles[r]):
            line.append(ch, style=st)
        rows.append(line)
    axis = [" "] * plot_w
    for frac in (0.0, 0.5, 1.0):
        x = x_lo + frac * (x_hi - x_lo)
        label = format_number(x, 0)
        c = min(int(frac * (plot_w - 1)), plot_w - len(label))
        axis[c:c + len(label)] = label
    rows.append(Text(" " * (YGUTTER - 1) + "└" + "".join(axis), style="dim"))
    rows.append(Text(" " * YGUTTER + f"{x_label:^{plot_w}}", style="dim"))
    return rows


class BlandAltmanPlot(Widget):
    """The scatter of one parameter and pair; ``select`` moves the highlighted point."""

    DEFAULT_CSS = "BlandAltmanPlot { height: 1fr; }"

    def __init__(self, **kwargs) -> None:
        super().__init__(**kwargs)
        self.mean = np.array([])
        self.diff = np.array([])
        self.bias = self.low = self.high = math.nan
        self.selected: int | None = None
        self.extra: dict = {}

    def show(self, mean: np.ndarray, diff: np.ndarray, bias: float, low: float, high: float,
             selected: int | None, **extra) -> None:
        """Points, lines and selection; ``extra``: line (intercept, slope), x_label, y_label (see scatter_rows)."""
        self.mean, self.diff = np.asarray(mean, float), np.asarray(diff, float)
        self.bias, self.low, self.high, self.selected = bias, low, high, selected
        self.extra = extra
        self.refresh()

    def render(self) -> Text:
        rows = scatter_rows(self.mean, self.diff, self.bias, self.low, self.high,
                            self.size.width, self.size.height, self.selected, **self.extra)
        return Text("\n").join(rows)
