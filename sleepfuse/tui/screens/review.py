"""The review dialog: exclude or re-include one instrument's night, with a reason typed in.

The decision is saved at once (atomically) by ``Workspace.decide`` into the
study's review file; the screen that asked refreshes itself.
"""

from __future__ import annotations

from typing import Callable

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from rich.text import Text
from textual.widgets import Input, Label, Static

from sleepfuse.model.definitions import SOURCE_NAMES
from . import tcss


class ReviewDialog(ModalScreen[tuple[str, str] | None]):
    """Asks which instrument and why; dismisses with (source, reason) or None."""

    CSS_PATH = tcss("review")
    BINDINGS = [
        Binding("escape", "cancel", "Cancel"),
        Binding("up", "pick(-1)", "Previous instrument", key_display="↑"),
        Binding("down", "pick(1)", "Next instrument", key_display="↓"),
        Binding("ctrl+s", "save", "Save"),
    ]

    def __init__(self, participant: str, night: str, decision: str, sources: list[tuple[str, str]],
                 initial: str | None = None) -> None:
        super().__init__()
        self.participant, self.night, self.decision = participant, night, decision
        self.sources = sources  # (source, current status)
        self.initial = initial if initial in {s for s, _ in sources} else (sources[0][0] if sources else None)

    def compose(self) -> ComposeResult:
        verb = "Exclude" if self.decision == "exclude" else "Re-include"
        with Vertical(id="dialog"):
            yield Label(f"{verb} {self.participant}, night {self.night}", id="dialog-title")
            yield Static(self._source_text(), id="source")
            hint = "reason (required)" if self.decision == "exclude" else "reason (optional)"
            yield Input(placeholder=hint, id="reason")
            yield Static("", id="dialog-error")
            yield Static("↑↓ instrument · Enter save · Esc cancel", id="dialog-hint")

    def on_mount(self) -> None:
        self.query_one("#reason", Input).focus()

    def _source_text(self) -> Text:
        """One line per instrument; the chosen one marked '▸' (readable without colour)."""
        t = Text()
        for s, status in self.sources:
            chosen = s == self.initial
            t.append(("▸ " if chosen else "  ") + f"{SOURCE_NAMES[s]} ({status})\n", style="bold" if chosen else "")
        return t

    def action_pick(self, step: int) -> None:
        names = [s for s, _ in self.sources]
        if names:
            self.initial = names[(names.index(self.initial) + step) % len(names)]
            self.query_one("#source", Static).update(self._source_text())

    def _source(self) -> str | None:
        return self.initial

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        self.action_save()

    def action_save(self) -> None:
        reason = self.query_one("#reason", Input).value.strip()
        source = self._source()
        if source is None:
            self.query_one("#dialog-error", Static).update("this night has no instrument to review")
            return
        if self.decision == "exclude" and not reason:
            self.query_one("#dialog-error", Static).update("type a reason: it is saved with the decision")
            return
        self.dismiss((source, reason))

    def action_cancel(self) -> None:
        self.dismiss(None)


def review_night(screen, participant: str, night: str, decision: str, *, initial: str | None = None,
                 on_saved: Callable[[], None] | None = None) -> None:
    """Open the dialog for this participant-night and save the answer through the workspace."""
    ws = screen.app.workspace
    if ws is None:
        screen.notify("the study is still loading", severity="warning")
        return
    sources = []
    for s in ("psg", "actigraphy", "diary"):
        row = ws.row(participant, night, s)
        if row is not None:
            sources.append((s, "included" if bool(row["included"]) else "excluded"))
    if not sources:
        screen.notify(f"{participant} has no instrument on {night}", severity="warning")
        return
    if initial is None:
        want = "included" if decision == "exclude" else "excluded"
        initial = next((s for s, st in sources if st == want), sources[0][0])

    def saved(answer: tuple[str, str] | None) -> None:
        if answer is None:
            return
        source, reason = answer
        try:
            ws.decide(participant, night, source, decision, reason, reviewer=screen.app.reviewer)
        except (OSError, ValueError) as exc:
            screen.notify(f"decision not saved: {exc}", severity="error")
            return
        verb = "excluded" if decision == "exclude" else "re-included"
        screen.notify(f"{participant} {night} {SOURCE_NAMES[source]} {verb}; saved to {ws.root.name}/sleepfuse-review.csv")
        if on_saved:
            on_saved()

    screen.app.push_screen(ReviewDialog(participant, night, decision, sources, initial), saved)
