"""The clusters screen's tables, as plain rows: BIC table, variable selection, outcomes, profiles.

Pure functions of an explore result (no widgets), so the screen stays a thin view and the
rows can be checked without a terminal. Every mark is a word or a sign, never colour alone
(the screen must read without colour).
"""

from __future__ import annotations

import math
from pathlib import Path

from rich.text import Text

VIEWS = ("models", "selection", "outcomes", "profiles")
VIEW_COLUMNS = {
    "models": (("family", 10), ("K", 2), ("loglik", 9), ("n_par", 5), ("BIC", 9), ("message", 30)),
    "selection": (("column", 30), ("selected", 8), ("BIC diff", 9), ("kept", 4), ("last step", 16)),
    "outcomes": (("outcome", 16), ("kind", 5), ("test", 14), ("stat", 7), ("p", 7), ("effect", 6),
                 ("ARI", 5), ("n", 4)),
    "profiles": (("cl", 2), ("n", 4), ("variable", 30), ("median", 8), ("IQR / share", 17)),
}
PARTICIPANTS_TABLE = "participants.csv"   # a study's a-priori labels and outcomes, as for explore --outcomes


def num(v, digits: int = 1) -> str:
    try:
        v = float(v)
    except (TypeError, ValueError):
        return "–"
    return f"{v:.{digits}f}" if math.isfinite(v) else "–"


def _right(value: str) -> Text:
    return Text(value, justify="right")


def model_rows(models) -> list[list]:
    """DataTable rows of the BIC table (family, K, loglik, free parameters, BIC, message)."""
    rows = []
    for r in models.itertuples(index=False):
        rows.append([r.family, _right(str(r.K)), _right(num(r.loglik)), _right(str(r.n_params)),
                     _right(num(r.BIC)), Text(r.message or "fitted", style="yellow" if r.message else "green")])
    return rows


def selection_rows(block) -> list[list]:
    """One row per candidate column: selected yes/no, BIC difference at its last decision, kept, last step."""
    sel = block.selection
    if sel is None:
        return []
    last = {}
    for step in sel.steps:
        last[step["column"]] = step["action"]
    rows = []
    for r in sel.columns_table().itertuples(index=False):
        rows.append([r.column, Text("yes" if r.selected else "no", style="bold" if r.selected else "dim"),
                     _right(num(r.bic_difference)), "keep" if r.kept else "", last.get(r.column, "")])
    return rows


def outcome_rows(tests) -> list[list]:
    """One row per outcome: kind, test, statistic, p, effect, ARI, n (as outcomes.csv)."""
    rows = []
    for r in tests.itertuples(index=False):
        test = r.test if isinstance(r.test, str) and r.test else "none"
        p = "<0.001" if isinstance(r.p, float) and r.p < 0.001 else num(r.p, 3)
        rows.append([r.outcome, r.kind[:5], test.replace("Fisher exact (odds ratio)", "Fisher (OR)"), _right(num(r.statistic, 2)),
                     _right(p), _right(num(r.effect, 2)), _right(num(r.ari, 2)), _right(str(r.n))])
    return rows


def profile_rows(profiles) -> list[list]:
    """One row per cluster and variable: n, median and IQR (numeric) or count and share (a level)."""
    rows = []
    for r in profiles.itertuples(index=False):
        if r.kind == "numeric":
            spread = f"{num(r.q1)} – {num(r.q3)}"
            middle = num(r.median)
        else:
            spread = f"{int(r.count)} ({num(100 * r.share, 0)} %)"
            middle = ""
        rows.append([_right(str(r.cluster)), _right(str(r.n)), r.variable, _right(middle), _right(spread)])
    return rows


def read_outcomes_table(path: Path | None):
    """(table or None, a line saying where the outcomes come from or why there are none)."""
    from sleepfuse.explore.outcomes import read_outcomes
    from sleepfuse.model.errors import ConfigError

    if path is None or not Path(path).is_file():
        where = f" ({path})" if path is not None else ""
        return None, (f"no participants table{where}: put a {PARTICIPANTS_TABLE} with a 'participant' column "
                      "and a-priori labels or outcomes in the study folder")
    try:
        return read_outcomes(path), f"outcomes from {path}"
    except ConfigError as exc:
        return None, f"{path} cannot be used: expected {exc.allowed}"


def view_line(current: str, note: str = "") -> Text:
    """The view tabs: the current one in brackets and bold (legible without colour), v moves on."""
    t = Text(" ")
    for name in VIEWS:
        if name == current:
            t.append(f"[{name}]", style="bold reverse")
        else:
            t.append(f" {name} ", style="dim")
        t.append(" ")
    t.append("(v)", style="dim")
    if note:
        t.append(f"  {note}")
    return t
