"""Export from inside the app: the same ``sleepfuse batch`` run, into a folder chosen here, with progress.

The dialog offers what the command line offers: the format, the Bland–Altman
figures (``--plots``), the study report (``--report``) and the number of
worker processes (``--workers``). The folder field completes existing folder
names (→ accepts) and starts at the folder this study was last exported to.
"""

from __future__ import annotations

import os
from pathlib import Path

from textual import work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.screen import ModalScreen
from textual.suggester import Suggester
from textual.widgets import Checkbox, Input, Label, ProgressBar, Static

from ..messages import ExportFinished, ExportProgressed
from ..recent import remember_export, remembered_export
from . import tcss

STEPS = {"participants": "scoring", "figures": "drawing figure", "report": "writing the report"}


class FolderSuggester(Suggester):
    """Completes the typed path with the first existing folder that starts with it (→ accepts)."""

    def __init__(self) -> None:
        super().__init__(use_cache=False, case_sensitive=True)

    async def get_suggestion(self, value: str) -> str | None:
        if not value:
            return None
        path = Path(value).expanduser()
        parent, stem = (path, "") if value.endswith(os.sep) else (path.parent, path.name)
        try:
            names = sorted(p.name for p in parent.iterdir() if p.is_dir() and not p.name.startswith("."))
        except OSError:
            return None
        for name in names:
            if name.startswith(stem) and name != stem:
                return value + name[len(stem):] + os.sep
        return None


class Tick(Checkbox):
    """A checkbox whose mark is a tick or a blank, so it reads without colour (NO_COLOR, 16 colours)."""

    @property
    def BUTTON_INNER(self) -> str:  # noqa: N802 (Textual's name for the mark)
        return "✓" if self.value else " "


def check_folder(study: Path, text: str) -> tuple[Path | None, str]:
    """The output folder typed, or None and what to fix."""
    text = text.strip()
    if not text:
        return None, "type the output folder"
    out = Path(text).expanduser()
    if out.exists() and not out.is_dir():
        return None, f"{out} is a file; give a folder"
    if out.resolve() == Path(study).resolve():
        return None, "that is the study folder itself; give a folder for the outputs (e.g. a sub-folder)"
    return out, ""


def check_workers(text: str) -> tuple[int | None, str]:
    try:
        n = int(text.strip() or "1")
    except ValueError:
        return None, f"workers: {text!r} is not a whole number"
    if n < 1:
        return None, "workers: give 1 or more"
    return n, ""


class ExportScreen(ModalScreen[list[Path] | None]):
    """Asks for the folder and the options, runs the batch export in a worker, lists the files written."""

    CSS_PATH = tcss("export")
    BINDINGS = [
        Binding("escape", "close", "Close"),
        Binding("ctrl+f", "toggle_format", "CSV/Parquet"),
        Binding("ctrl+s", "start", "Start export"),
    ]
    HELP_KEYS = [("tab", "next field"), ("space", "tick or untick an option"),
                 ("→", "accept the folder name suggested"), ("enter", "start (in the folder or workers field)")]

    def __init__(self, study: Path, out: Path, *, explicit: bool = False) -> None:
        """``out``: the app's default folder; unless ``explicit`` (given with --export-dir), the folder this
        study was last exported to comes first."""
        super().__init__()
        self.study = Path(study)
        remembered = None if explicit else remembered_export(self.study)
        self.out = remembered or Path(out)
        self.format = "csv"
        self.running = False
        self.written: list[Path] = []

    def compose(self) -> ComposeResult:
        with Vertical(id="export"):
            yield Label("Export every table (as sleepfuse batch)", id="export-title")
            with Horizontal(classes="export-row"):
                yield Label("Folder ", classes="export-label")
                yield Input(str(self.out), id="out", suggester=FolderSuggester())
            with Horizontal(classes="export-row"):
                yield Tick("study report (report.html)", False, id="report")
                yield Tick("figures (plots/)", False, id="plots")
            with Horizontal(classes="export-row"):
                yield Label("Workers ", classes="export-label")
                yield Input("1", id="workers", type="integer", max_length=3)
                yield Static(self._format_line(), id="export-format")
            yield ProgressBar(id="export-bar", show_eta=False)
            yield Static("Enter or Ctrl+S start · Tab next · Space tick · Ctrl+F format · Esc close",
                         id="export-status")

    def _format_line(self) -> str:
        return f" format: {self.format} (Ctrl+F)"

    def on_mount(self) -> None:
        self.query_one("#out", Input).focus()

    def action_toggle_format(self) -> None:
        self.format = "parquet" if self.format == "csv" else "csv"
        self.query_one("#export-format", Static).update(self._format_line())

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        self.action_start()

    def _status(self, text: str) -> None:
        self.query_one("#export-status", Static).update(text)

    def action_start(self) -> None:
        if self.running:
            return
        out, problem = check_folder(self.study, self.query_one("#out", Input).value)
        workers, problem2 = check_workers(self.query_one("#workers", Input).value)
        if out is None or workers is None:
            self._status(f"cannot start: {problem or problem2}")
            return
        from sleepfuse.run.batch import BatchOptions

        self.out = out
        options = BatchOptions(out=out, format=self.format, plots=self.query_one("#plots", Checkbox).value,
                               report=self.query_one("#report", Checkbox).value, workers=workers)
        self.running = True
        self._status(f"exporting to {self.out} …")
        self.run_export(self.study, options)

    @work(thread=True, exclusive=True, exit_on_error=False)
    def run_export(self, study: Path, options) -> None:
        from sleepfuse.run.batch import run_batch

        def step(label: str):
            def update(item: str, i: int, n: int) -> None:
                self.post_message(ExportProgressed(item, i, n, step=label))

            return update

        try:
            result = run_batch(study, options, progress=step("participants"), step_progress=step,
                               argv=["sleepfuse", "open", str(study)])
        except Exception as exc:  # a failed export is reported, never a crash
            self.post_message(ExportFinished([], f"{type(exc).__name__}: {exc}"))
            return
        self.post_message(ExportFinished(list(result.written)))

    def on_export_progressed(self, message: ExportProgressed) -> None:
        bar = self.query_one("#export-bar", ProgressBar)
        bar.update(total=max(message.total, 1), progress=message.done)
        if message.participant:
            doing = STEPS.get(message.step, message.step)
            self._status(f"{doing} {message.participant} ({message.done + 1} of {message.total})")

    def on_export_finished(self, message: ExportFinished) -> None:
        self.running = False
        if message.error:
            self._status(f"export failed: {message.error}")
            self.notify(message.error, title="export failed", severity="error")
            return
        self.written = message.written
        remember_export(self.study, self.out)
        report = self.out / "report.html"
        names = ", ".join(p.name for p in message.written if p.parent == self.out)
        extra = f" · open {report} in a browser" if report in message.written else ""
        self._status(f"wrote {len(message.written)} files to {self.out}: {names}{extra} · Esc close")
        self.notify(f"exported {len(message.written)} files to {self.out}")

    def action_close(self) -> None:
        if self.running:
            self.notify("the export is still running", severity="warning")
            return
        self.dismiss(self.written or None)
