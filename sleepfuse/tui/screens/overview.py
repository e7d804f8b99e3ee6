"""Study overview: one row per participant, one column per night, which instruments have that night.

Each cell is four characters that read in monochrome: P, A, D in fixed
places (PSG, actigraphy, diary), '·' where the instrument is missing, '×'
where it is excluded, and '!' when the QC log has a warning or error for
that night. The side panel shows the participant's nightly counts, the
highlighted night and its QC problems. Loading runs in a worker that posts
one message per chunk of participants, so rows appear as they are scored.
"""

from __future__ import annotations

from rich.text import Text
from textual import work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, VerticalScroll
from textual.screen import Screen
from textual.widgets import DataTable, Footer, ProgressBar, Static
from textual.worker import get_current_worker

from sleepfuse.model.definitions import SOURCE_NAMES, instrument_nights
from sleepfuse.model.numbers import plural
from sleepfuse.model.qc import qc_summary
from sleepfuse.run.session import SOURCES, StudyLoader, Workspace, night_cells, problems_per_night
from ..messages import ParticipantsScored, StudyFailed, StudyLoaded, StudyPlanned
from ..widgets.appbar import AppBar
from ..widgets.table import CursorTable
from . import tcss

GLYPH_STYLE = {"P": "bold green", "A": "bold cyan", "D": "bold magenta", "×": "bold red", "!": "bold yellow", "·": "dim"}
LEGEND = "P A D = PSG actigraphy diary   · missing   × excluded   ! QC problem"
EMPTY = "    "


def cell_text(glyphs: str) -> Text:
    text = Text()
    for ch in glyphs:
        text.append(ch, style=GLYPH_STYLE.get(ch, ""))
    return text


def grid_rows(participants: list[str], nights: list[str], cells: dict) -> list[list]:
    """Table rows: participant, then one cell per night (blank where the participant has no row that night)."""
    rows = []
    for pid in participants:
        row: list = [Text(pid, style="bold")]
        for n in nights:
            c = cells.get((pid, n))
            row.append(cell_text(c.glyphs()) if c is not None else EMPTY)
        rows.append(row)
    return rows


class OverviewScreen(Screen):
    """The first screen: the study at a glance."""

    CSS_PATH = tcss("overview")
    BINDINGS = [
        Binding("enter", "open_night", "Night", tooltip="open the night view of the highlighted participant and night"),
        Binding("d", "app.disagreements", "Disagree", tooltip="nights ranked by how far two instruments disagree"),
        Binding("a", "app.agreement", "Agree", tooltip="Bland–Altman agreement of a pair of instruments on one parameter"),
        Binding("c", "app.clusters", "Clust",
                tooltip="exploratory clustering preview of the participant × feature matrix"),
        Binding("x", "exclude", "Excl", tooltip="exclude this night for one instrument, with a reason"),
        Binding("i", "include", "Incl", tooltip="re-include an excluded night for one instrument"),
        Binding("e", "app.export", "Export", tooltip="write every output table (same as sleepfuse batch)"),
        Binding("q", "app.quit", "Quit", tooltip="leave sleepfuse"),
        Binding("h", "move('left')", "Cursor left", show=False),
        Binding("j", "move('down')", "Cursor down", show=False),
        Binding("k", "move('up')", "Cursor up", show=False),
        Binding("l", "move('right')", "Cursor right", show=False),
    ]
    HELP_KEYS = [("← → ↑ ↓", "move between nights and participants (as h l k j)")]

    def __init__(self) -> None:
        super().__init__()
        self.nights: list[str] = []
        self.row_pids: list[str] = []
        self.cells: dict = {}
        self.version = -1

    def compose(self) -> ComposeResult:
        yield AppBar(self.app.study_name, "overview")
        with Horizontal(id="body"):
            yield CursorTable(id="grid", cursor_type="cell", fixed_columns=1, cell_padding=0, header_height=2)
            with VerticalScroll(id="side-scroll"):
                yield Static("", id="side")
        with Horizontal(id="loading"):
            yield Static("finding files…", id="load-label")
            yield ProgressBar(id="load-bar", show_eta=False)
        yield Static(LEGEND, id="legend")
        yield Footer()

    def on_mount(self) -> None:
        ws = self.app.workspace
        if ws is not None:
            self._show_workspace(ws)
        else:
            self.load_study(self.app.study)
        self.query_one("#grid", DataTable).focus()

    def on_screen_resume(self) -> None:
        ws = self.app.workspace
        if ws is not None and ws.version != self.version:
            self._sync_cells(ws)

    def _sync_cells(self, ws: Workspace) -> None:
        """After review decisions: redraw only the cells that changed (no per-row or full rebuild)."""
        if ws.study_nights() != self.nights or ws.participants != self.row_pids:
            self._show_workspace(ws)
            return
        table = self.query_one("#grid", DataTable)
        new = ws.cells()
        for key in set(new) | set(self.cells):
            if new.get(key) != self.cells.get(key):
                pid, night = key
                value = cell_text(new[key].glyphs()) if key in new else EMPTY
                table.update_cell_at((self.row_pids.index(pid), self.nights.index(night) + 1), value)
        self.cells, self.version = new, ws.version
        self._update_side()

    # --- loading ----------------------------------------------------------------
    @work(thread=True, exclusive=True, exit_on_error=False)
    def load_study(self, root) -> None:
        """Discover and score the study in chunks; post a message per chunk (never touches widgets)."""
        worker = get_current_worker()
        try:
            loader = StudyLoader(root)
        except Exception as exc:  # configuration or discovery error: say so on screen
            self.post_message(StudyFailed(f"{type(exc).__name__}: {exc}"))
            return
        pids = loader.participants
        self.post_message(StudyPlanned(pids))
        small = len(pids) <= 20
        starts = list(range(0, len(pids))) if small else [0, *range(4, len(pids), 25)]  # first rows fast
        for k, start in enumerate(starts):
            if worker.is_cancelled:
                return
            part = pids[start:starts[k + 1] if k + 1 < len(starts) else len(pids)]
            rows = loader.score(part)
            cells = night_cells(rows, problems_per_night(loader.qc.entries))
            self.post_message(ParticipantsScored(rows, cells, start + len(part), len(pids)))
        self.post_message(StudyLoaded(loader.finish()))

    def on_study_planned(self, message: StudyPlanned) -> None:
        self.query_one("#load-bar", ProgressBar).update(total=max(len(message.participants), 1), progress=0)
        self.query_one("#load-label", Static).update(f"scoring {len(message.participants)} participants")

    def on_participants_scored(self, message: ParticipantsScored) -> None:
        table = self.query_one("#grid", DataTable)
        chunk = message.nights
        if chunk.empty:
            pids = []
        else:
            pids = list(dict.fromkeys(chunk["participant"]))
        if not self.nights and not chunk.empty:
            self._set_columns(table, _date_range(chunk))
        if self.nights:
            first = not self.row_pids
            table.add_rows(grid_rows(pids, self.nights, message.cells))
            self.row_pids += pids
            self.cells.update(message.cells)
            if first and pids:
                table.move_cursor(row=0, column=1, animate=False)
        self.query_one("#load-bar", ProgressBar).update(progress=message.done)
        self.query_one("#load-label", Static).update(f"scored {message.done} of {message.total}")

    def on_study_loaded(self, message: StudyLoaded) -> None:
        self.app.workspace = message.workspace
        ws = message.workspace
        self._sync_cells(ws)
        self.query_one("#loading").display = False
        self._update_side()
        self.notify(f"{plural(len(ws.participants), 'participant')}, {instrument_nights(ws.nights)} included; "
                    f"QC log: {qc_summary(ws.qc)}", timeout=6)

    def on_study_failed(self, message: StudyFailed) -> None:
        self.query_one("#load-label", Static).update(f"could not open the study: {message.error}")
        self.notify(message.error, title="study not opened", severity="error", timeout=30)

    # --- drawing -------------------------------------------------------------------
    def _set_columns(self, table: DataTable, nights: list[str]) -> None:
        table.clear(columns=True)
        self.nights = nights
        table.add_column(Text("\nid", style="bold"), width=5, key="participant")
        for k, n in enumerate(nights):
            table.add_column(night_label(n, first=k == 0), width=5, key=n)

    def _show_workspace(self, ws: Workspace) -> None:
        """Rebuild the grid in one add_rows call (cursor kept)."""
        table = self.query_one("#grid", DataTable)
        where = table.cursor_coordinate
        self._set_columns(table, ws.study_nights())
        self.row_pids = list(ws.participants)
        self.cells = ws.cells()
        table.add_rows(grid_rows(self.row_pids, self.nights, self.cells))
        self.query_one("#loading").display = False
        self.version = ws.version
        if self.row_pids:
            table.move_cursor(row=min(where.row, len(self.row_pids) - 1),
                              column=max(1, min(where.column, len(self.nights))), animate=False)
        self._update_side()

    def current(self, coordinate=None) -> tuple[str | None, str | None]:
        """The participant and night under the cursor (or at ``coordinate``)."""
        c = coordinate or self.query_one("#grid", DataTable).cursor_coordinate
        pid = self.row_pids[c.row] if 0 <= c.row < len(self.row_pids) else None
        night = self.nights[c.column - 1] if 1 <= c.column <= len(self.nights) else None
        return pid, night

    def move_to(self, participant: str, night: str) -> None:
        """Put the cursor on a participant-night (the night view calls this on its way back)."""
        if participant in self.row_pids and night in self.nights:
            self.query_one("#grid", DataTable).move_cursor(
                row=self.row_pids.index(participant), column=self.nights.index(night) + 1, animate=False)

    def on_data_table_cell_highlighted(self, event: DataTable.CellHighlighted) -> None:
        self._update_side()

    def on_data_table_cell_selected(self, event: DataTable.CellSelected) -> None:
        """A mouse click on a cell (Enter is the screen's own binding)."""
        event.stop()
        self.action_open_night(event.coordinate)

    def _update_side(self) -> None:
        ws = self.app.workspace
        side = self.query_one("#side", Static)
        pid, night = self.current()
        if ws is None or pid is None:
            side.update("loading…" if ws is None else "no participants")
            return
        side.update(side_panel(ws, pid, night))

    # --- actions -------------------------------------------------------------------
    def action_move(self, direction: str) -> None:
        table = self.query_one("#grid", DataTable)
        getattr(table, f"action_cursor_{direction}")()

    def action_open_night(self, coordinate=None) -> None:
        pid, night = self.current(coordinate)
        if self.app.workspace is None:
            self.notify("the study is still loading", severity="warning")
            return
        if pid is None:
            return
        nights = self.app.workspace.participant_nights(pid)
        if not nights:
            self.notify(f"{pid} has no scored night", severity="warning")
            return
        if night not in nights:  # a blank cell: never open another night in its place
            self.notify(blank_cell_message(pid, night, nights), severity="warning")
            return
        self.app.open_night(pid, night)

    def _review(self, decision: str) -> None:
        from .review import review_night

        pid, night = self.current()
        if pid is None or night is None:
            return
        review_night(self, pid, night, decision, on_saved=self._after_decision)

    def action_exclude(self) -> None:
        self._review("exclude")

    def action_include(self) -> None:
        self._review("include")

    def _after_decision(self) -> None:
        self._sync_cells(self.app.workspace)


def night_label(iso: str, *, first: bool = False) -> Text:
    """Two header lines: the month where it starts (or in the first column), then weekday and day ('Sa31')."""
    import datetime as dt

    day = dt.date.fromisoformat(iso)
    month = f"{day:%b}" if first or day.day == 1 else ""
    return Text(f"{month}\n{day:%a}"[: len(month) + 3] + f"{day.day:02d}")


def blank_cell_message(pid: str, night: str | None, nights: list[str]) -> str:
    """What Enter on a blank cell says: no night there, and the participant's scored nights either side."""
    if night is None:
        return f"{pid}: choose a night column ({len(nights)} scored nights)"
    before = [n for n in nights if n < night]
    after = [n for n in nights if n > night]
    near = ", ".join(n for n in (before[-1] if before else None, after[0] if after else None) if n)
    return f"{pid} has no scored night on {night}; nearest: {near}"


def _date_range(nights) -> list[str]:
    import pandas as pd

    days = pd.to_datetime(nights["night"])
    return [d.date().isoformat() for d in pd.date_range(days.min(), days.max(), freq="D")]


def side_panel(ws: Workspace, pid: str, night: str | None) -> Text:
    """The participant's counts, the highlighted night per instrument, and QC problems."""
    summary = ws.participant_summary(pid)
    t = Text()
    t.append(f"{pid}\n", style="bold")
    t.append("nights included/all\n", style="dim")
    for s in SOURCES:
        inc, total = summary["counts"][s]
        t.append(f" {SOURCE_NAMES[s]:<11}{inc:>3}/{total:<3}\n")
    if night:
        t.append(f"\n{night}\n", style="bold")
        for s in SOURCES:
            row = ws.row(pid, night, s)
            state = "–" if row is None else ("included" if bool(row["included"]) else "EXCLUDED")
            t.append(f" {SOURCE_NAMES[s]:<11}{state}\n", style="bold red" if state == "EXCLUDED" else "")
            if row is not None and not bool(row["included"]) and row["qc"]:
                t.append(f"   {row['qc']}\n", style="dim")
    problems = summary["problems"]
    t.append(f"\nQC problems ({len(problems)})\n", style="bold")
    for e in problems[:12]:
        mark = "E" if e.severity == "error" else "W"
        t.append(f" {mark} {e.night[5:] or '     '} {e.message}\n", style="red" if mark == "E" else "")
    if len(problems) > 12:
        t.append(f" … {len(problems) - 12} more (sleepfuse check)\n", style="dim")
    if summary["decisions"]:
        t.append("\nreview decisions\n", style="bold")
        for d in summary["decisions"]:
            by = f" ({d.reviewer})" if d.reviewer else ""
            t.append(f" {d.night[5:]} {d.source} {d.decision}{by}: {d.reason}\n")
    return t
