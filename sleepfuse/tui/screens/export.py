"""Export from inside the app: the same ``sleepfuse batch`` run, into a folder, with a progress bar."""

from __future__ import annotations

from pathlib import Path

from textual import work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Input, Label, ProgressBar, Static

from ..messages import ExportFinished, ExportProgressed
from . import tcss


class ExportScreen(ModalScreen[list[Path] | None]):
    """Asks for the output folder, runs the batch export in a worker, lists the files written."""

    CSS_PATH = tcss("export")
    BINDINGS = [
        Binding("escape", "close", "Close"),
        Binding("ctrl+f", "toggle_format", "CSV/Parquet"),
    ]

    def __init__(self, study: Path, out: Path) -> None:
        super().__init__()
        self.study, self.out = Path(study), Path(out)
        self.format = "csv"
        self.running = False
        self.written: list[Path] = []

    def compose(self) -> ComposeResult:
        with Vertical(id="export"):
            yield Label("Export every table (as sleepfuse batch)", id="export-title")
            yield Input(str(self.out), id="out")
            yield Static(self._format_line(), id="export-format")
            yield ProgressBar(id="export-bar", show_eta=False)
            yield Static("Enter start · Ctrl+F format · Esc close", id="export-status")

    def _format_line(self) -> str:
        return f"format: {self.format}  (review decisions are honoured and listed in provenance.json)"

    def on_mount(self) -> None:
        self.query_one("#out", Input).focus()

    def action_toggle_format(self) -> None:
        self.format = "parquet" if self.format == "csv" else "csv"
        self.query_one("#export-format", Static).update(self._format_line())

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        if self.running:
            return
        self.out = Path(event.value.strip() or str(self.out)).expanduser()
        self.running = True
        self.query_one("#export-status", Static).update(f"exporting to {self.out} …")
        self.run_export(self.study, self.out, self.format)

    @work(thread=True, exclusive=True, exit_on_error=False)
    def run_export(self, study: Path, out: Path, fmt: str) -> None:
        from sleepfuse.run.batch import BatchOptions, run_batch

        def progress(participant: str, i: int, n: int) -> None:
            self.post_message(ExportProgressed(participant, i, n))

        try:
            result = run_batch(study, BatchOptions(out=out, format=fmt), progress=progress,
                               argv=["sleepfuse", "open", str(study)])
        except Exception as exc:  # a failed export is reported, never a crash
            self.post_message(ExportFinished([], f"{type(exc).__name__}: {exc}"))
            return
        self.post_message(ExportFinished(list(result.written)))

    def on_export_progressed(self, message: ExportProgressed) -> None:
        bar = self.query_one("#export-bar", ProgressBar)
        bar.update(total=max(message.total, 1), progress=message.done)
        if message.participant:
            self.query_one("#export-status", Static).update(f"scoring {message.participant} "
                                                            f"({message.done + 1} of {message.total})")

    def on_export_finished(self, message: ExportFinished) -> None:
        self.running = False
        status = self.query_one("#export-status", Static)
        if message.error:
            status.update(f"export failed: {message.error}")
            self.notify(message.error, title="export failed", severity="error")
            return
        self.written = message.written
        names = ", ".join(p.name for p in message.written)
        status.update(f"wrote {len(message.written)} files to {self.out}: {names} · Esc close")
        self.notify(f"exported {len(message.written)} files to {self.out}")

    def action_close(self) -> None:
        if self.running:
            self.notify("the export is still running", severity="warning")
            return
        self.dismiss(self.written or None)
