"""Clusters: an exploratory clustering preview of the participant × feature matrix.

One instrument block (``b`` cycles diary, actigraphy, psg, all) or the columns
typed in the field (names or glob patterns, comma-separated; ``/`` goes there,
Enter fits) is fitted with Gaussian, skew-normal and t mixtures for K = 1..K max
(``+``/``−``), chosen by BIC (sleepfuse.explore), with the command line's
defaults (K max, EM starts: ``explore.names``). ``s`` turns the stepwise BIC
variable selection on or off (as ``explore --select``). ``v`` cycles the table:
the BIC table with each model's message, the variable selection, the clusters
against the study's participants table (``participants.csv`` in the study
folder, the table ``explore --outcomes`` reads), and each cluster's profile
(n, median and IQR per column). The caution that clustering is exploratory
stays in view. Fitting runs in a worker that posts its progress and result as
messages; it never touches widgets.
"""

from __future__ import annotations

from rich.text import Text
from textual import work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.screen import Screen
from textual.widgets import DataTable, Footer, Input, Static

from ...explore.columns import BLOCKS
from ...explore.names import DEFAULT_FAMILIES, DEFAULT_KMAX, DEFAULT_STARTS, EXPLORATORY_CAUTION
from ..messages import ClustersFailed, ClustersFitted, ClustersProgress
from ..widgets.appbar import AppBar
from . import tcss
from .explore_views import (PARTICIPANTS_TABLE, VIEW_COLUMNS, VIEWS, model_rows, num as _num, outcome_rows,
                            profile_rows, read_outcomes_table, selection_rows, view_line)

KMAX_RANGE = (1, 8)
KMAX_DEFAULT = DEFAULT_KMAX   # the command line's defaults, one definition (sleepfuse.explore.names)
STARTS = DEFAULT_STARTS
DEFAULT_BLOCK = "all"  # as sleepfuse explore without --blocks


def preferred_line(block) -> Text:
    """The BIC-preferred model, or why nothing could be fitted."""
    best = block.preferred
    t = Text(" ")
    if best is None:
        t.append("no model could be fitted", style="bold red")
        t.append(" — ↑ ↓ read each model's message below")
        return t
    t.append(f"preferred by BIC: {best.family} K={best.n_components}", style="bold")
    t.append(f" (BIC {_num(best.bic)})")
    if not best.converged:
        t.append(" not converged", style="bold yellow")
    if best.n_components == 1:
        t.append(" — one group: no subgroups at this K max", style="dim")
    else:
        t.append(" — a hypothesis to test on new participants", style="yellow")
    return t


def sizes_line(block) -> Text:
    """Participants per cluster (highest posterior) and the expected count (sum of posteriors)."""
    sizes = block.cluster_sizes
    t = Text()
    t.append(" cluster sizes ", style="bold")
    if sizes.empty:
        t.append("– (no model fitted)", style="dim")
        return t
    for r in sizes.itertuples(index=False):
        t.append(f" {r.cluster}: {r.n_assigned} (expected {r.expected:.1f}, weight {r.weight:.2f}) ")
    return t


def left_out_line(block) -> Text:
    """How many participants were left out for missing values, and the first reason."""
    excluded = block.data.excluded
    n_in = len(block.data.participants)
    t = Text()
    t.append(f" {n_in} complete participant(s), ", style="bold")
    if excluded.empty:
        t.append("none left out")
        return t
    t.append(f"{len(excluded)} left out", style="bold yellow")
    first = excluded.iloc[0]
    t.append(f": {first['participant']} {first['reason']}" + (" …" if len(excluded) > 1 else ""))
    return t


def notes_text(block) -> str:
    """The run's notes (dropped columns, too few participants per column), in the screen's words."""
    return " ".join(n.replace("; consider fewer columns with --columns", "; type fewer columns (/)")
                    for n in block.notes)


class _Superseded(Exception):
    """Raised in the worker when a newer run has started, so a stale fit stops early."""


class ExploreScreen(Screen):
    """Exploratory clustering preview: BIC table, selection, outcomes and profiles, sizes, left-out participants."""

    CSS_PATH = tcss("explore")
    BINDINGS = [
        Binding("b", "next_block", "Block", tooltip="next instrument block: diary, actigraphy, psg, all"),
        Binding("plus", "kmax(1)", "K max+", key_display="+", tooltip=f"try one more cluster (K max up to {KMAX_RANGE[1]})"),
        Binding("minus", "kmax(-1)", "K max−", key_display="−", tooltip="try one cluster fewer"),
        Binding("s", "toggle_select", "Select", tooltip="stepwise BIC variable selection on or off (explore --select)"),
        Binding("v", "next_view", "View", tooltip="next table: models, selection, outcomes (from participants.csv "
                "in the study folder), profiles"),
        Binding("slash", "edit_columns", "Columns", key_display="/",
                tooltip="type column names or glob patterns, comma-separated; Enter fits them"),
        Binding("escape,q", "back", "Back", key_display="q",
                tooltip="back to the overview (Esc in the column field: back to the table)"),
    ]
    HELP_KEYS = [("enter", "in the column field: fit the columns typed (empty: back to the block)"),
                 ("↑ ↓", "move in the table; the line below shows the whole message")]

    def __init__(self) -> None:
        super().__init__()
        self.block = DEFAULT_BLOCK
        self.columns = ""  # typed names or patterns; when set, they are fitted instead of the block
        self.kmax = KMAX_DEFAULT
        self.select = False  # as the command line without --select
        self.view = VIEWS[0]
        self.run = 0
        self.running = False
        self.result = None
        self.tables = None  # (outcome tests, profiles, participants missing from the outcomes table)
        self.outcomes_note = ""
        self.error = ""
        self.version = -1
        self._matrix = None

    def compose(self) -> ComposeResult:
        yield AppBar(self.app.study_name, "clusters")
        yield Static(EXPLORATORY_CAUTION, id="caution")
        yield Static("", id="choice")
        yield Input(placeholder="columns or patterns, e.g. psg_*_mean,diary_sol_min_mean (/ then Enter)",
                    id="columns")
        yield Static("", id="status")
        yield Static("", id="view")
        yield DataTable(id="models", cursor_type="row", zebra_stripes=True)
        yield Static("", id="detail")
        yield Static("", id="sizes")
        yield Static("", id="left-out")
        yield Static("", id="notes")
        yield Footer()

    def on_mount(self) -> None:
        self._set_columns()
        self.query_one("#models", DataTable).focus()
        self.start()

    def on_screen_resume(self) -> None:
        if self.app.workspace.version != self.version:
            self.start()

    # --- running ------------------------------------------------------------------------
    def matrix(self):
        ws = self.app.workspace
        if self._matrix is None or ws.version != self.version:
            self._matrix, self.version = ws.matrix(), ws.version
        return self._matrix

    def outcomes_path(self):
        """The participants table: the one given when the app opened a matrix, else participants.csv in the study."""
        given = getattr(self.app, "outcomes_path", None)
        return given if given is not None else self.app.study / PARTICIPANTS_TABLE

    def start(self) -> None:
        """Fit the current choice in the worker (a newer run makes older results stale)."""
        self.run += 1
        self.running = True
        self._show_choice()
        what = "the columns typed" if self.columns else f"block {self.block}"
        self.query_one("#status", Static).update(
            Text(f" fitting {', '.join(DEFAULT_FAMILIES)} mixtures, K = 1..{self.kmax}, on {what} …", style="italic"))
        self.fit(self.run, self.matrix(), self.columns or None, None if self.columns else self.block, self.kmax,
                 self.select, self.outcomes_path())

    @work(thread=True, exclusive=True, exit_on_error=False)
    def fit(self, run: int, matrix, columns: str | None, blocks: str | None, kmax: int, select: bool,
            outcomes_path) -> None:
        """The clustering preview off the interface thread; posts ClustersProgress, then ClustersFitted or
        ClustersFailed."""
        from sleepfuse.model.errors import ConfigError
        from ...explore.outcomes import relate_blocks
        from ...explore.selection import explore

        def progress(text: str) -> None:
            if run != self.run:              # a newer run started: stop this one at its next report
                raise _Superseded
            self.post_message(ClustersProgress(run, text))

        try:
            result = explore(matrix, columns=columns, blocks=blocks, kmax=kmax, starts=STARTS, seed=0,
                             select=select, progress=progress)
            outcomes, note = read_outcomes_table(outcomes_path)
            tables = relate_blocks(result, outcomes)
        except _Superseded:
            return
        except ConfigError as exc:
            self.post_message(ClustersFailed(run, f"columns {exc.value!r} cannot be used: expected {exc.allowed}"))
        except Exception as exc:  # a failed fit is reported on screen, never a crash
            self.post_message(ClustersFailed(run, f"{type(exc).__name__}: {exc}"))
        else:
            tests = tables[0] if outcomes is not None else None
            self.post_message(ClustersFitted(run, result, (tests, tables[1], tables[2], note)))

    def on_clusters_progress(self, message: ClustersProgress) -> None:
        if message.run == self.run and self.running:
            self.query_one("#status", Static).update(Text(f" … {message.text}", style="italic"))

    def on_clusters_fitted(self, message: ClustersFitted) -> None:
        if message.run != self.run:
            return
        self.running, self.result, self.tables, self.error = False, message.result, message.tables, ""
        self.outcomes_note = message.tables[3]
        self._show_result()

    def on_clusters_failed(self, message: ClustersFailed) -> None:
        if message.run != self.run:
            return
        self.running, self.result, self.tables, self.error = False, None, None, message.error
        self.query_one("#status", Static).update(Text(f" {message.error}", style="bold red"))
        self.notify(message.error, title="clusters not fitted", severity="error")
        self.query_one("#models", DataTable).clear()
        for name in ("#detail", "#sizes", "#left-out", "#notes"):
            self.query_one(name, Static).update("")

    # --- drawing ------------------------------------------------------------------------
    def _show_choice(self) -> None:
        t = Text(" ")
        if self.columns:
            t.append("columns typed", style="bold")
            t.append(" (b: blocks)")
        else:
            t.append(f"block {self.block}", style="bold")
            t.append(" (b)")
        t.append(f" · K max {self.kmax} (+ −) · selection {'on' if self.select else 'off'} (s) · {STARTS} starts")
        self.query_one("#choice", Static).update(t)

    def _set_columns(self) -> None:
        table = self.query_one("#models", DataTable)
        table.clear(columns=True)
        for label, width in VIEW_COLUMNS[self.view]:
            table.add_column(label, width=width, key=label)

    def _rows(self) -> tuple[list[list], str]:
        """The current view's rows, and a note when it has none."""
        block = self.result.blocks[0]
        if self.view == "models":
            return model_rows(block.models), ""
        if self.view == "selection":
            if block.selection is None:
                return [], "selection is off: s selects columns by stepwise BIC" if not self.select else \
                    "no selection: one usable column"
            return selection_rows(block), f"{len(block.selection.chosen)} of {len(block.selection.columns)} selected"
        tests, profiles = self.tables[:2] if self.tables else (None, None)
        if self.view == "outcomes":
            if tests is None:
                return [], self.outcomes_note
            return outcome_rows(tests), "" if len(tests) else "no clusters to relate (no model fitted)"
        if profiles is None or not len(profiles):
            return [], "no clusters to profile (no model fitted)"
        return profile_rows(profiles), "median, IQR in the matrix's units"

    def _show_table(self) -> None:
        table = self.query_one("#models", DataTable)
        table.clear()
        note = ""
        if self.result is not None and self.result.blocks:
            rows, note = self._rows()
            table.add_rows(rows)
        self.query_one("#view", Static).update(view_line(self.view, note))
        self._show_detail(table.cursor_row)

    def _show_result(self) -> None:
        block = self.result.blocks[0]
        self.query_one("#status", Static).update(preferred_line(block))
        self._show_table()
        self.query_one("#sizes", Static).update(sizes_line(block))
        self.query_one("#left-out", Static).update(left_out_line(block))
        self.query_one("#notes", Static).update(notes_text(block))

    def _show_detail(self, row: int) -> None:
        detail = self.query_one("#detail", Static)
        if self.result is None or not self.result.blocks:
            detail.update("")
            return
        block = self.result.blocks[0]
        columns = Text(f" {len(block.data.columns)} column(s): " + ", ".join(block.data.columns)
                       if block.data.columns else " no usable column", style="dim")
        if self.view == "outcomes":
            missing = self.tables[2] if self.tables else None
            line = Text(f" {self.outcomes_note}")
            if missing is not None and len(missing):
                line.append(f"; {len(missing)} clustered participant(s) not in it")
            detail.update(line)
            return
        models = block.models
        if self.view != "models" or not 0 <= row < len(models):
            detail.update(columns)
            return
        r = models.iloc[row]
        t = Text(f" {r['family']} K={r['K']}: {r['message'] or 'fitted'}\n")
        t.append_text(columns)
        detail.update(t)

    def on_data_table_row_highlighted(self, event: DataTable.RowHighlighted) -> None:
        event.stop()
        self._show_detail(event.cursor_row)

    # --- actions ------------------------------------------------------------------------
    def action_next_block(self) -> None:
        if self.columns:
            self.columns = ""  # back from typed columns to the blocks, at the current one
            self.query_one("#columns", Input).value = ""
        else:
            self.block = BLOCKS[(BLOCKS.index(self.block) + 1) % len(BLOCKS)]
        self.start()

    def action_kmax(self, step: int) -> None:
        k = min(max(self.kmax + step, KMAX_RANGE[0]), KMAX_RANGE[1])
        if k == self.kmax:
            self.notify(f"K max stays within {KMAX_RANGE[0]}..{KMAX_RANGE[1]}", severity="warning")
            return
        self.kmax = k
        self.start()

    def action_toggle_select(self) -> None:
        self.select = not self.select
        self.start()

    def action_next_view(self) -> None:
        self.view = VIEWS[(VIEWS.index(self.view) + 1) % len(VIEWS)]
        self._set_columns()
        self._show_table()

    def action_edit_columns(self) -> None:
        self.query_one("#columns", Input).focus()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        self.columns = event.value.strip()
        self.query_one("#models", DataTable).focus()
        self.start()

    def action_back(self) -> None:
        field = self.query_one("#columns", Input)
        if field.has_focus:
            self.query_one("#models", DataTable).focus()
            return
        if len(self.app.screen_stack) <= 2:   # opened on a matrix: this is the app's only screen
            self.app.exit()
            return
        self.app.pop_screen()
