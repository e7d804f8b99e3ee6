"""Progress on stderr for long runs (rich), silent when stderr is not a terminal unless asked."""

from __future__ import annotations

import contextlib
from typing import Callable, Iterator


@contextlib.contextmanager
def participant_progress(total_label: str = "participants", *, enabled: bool | None = None) -> Iterator[Callable[[str, int, int], None]]:
    """Yield ``update(participant, i, n)``; draws a rich progress bar on stderr."""
    from rich.console import Console
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

    console = Console(stderr=True)
    show = console.is_terminal if enabled is None else enabled
    if not show:
        yield lambda participant, i, n: None
        return
    progress = Progress(
        TextColumn("[bold]{task.description}"), BarColumn(), MofNCompleteColumn(), TimeElapsedColumn(),
        TextColumn("{task.fields[current]}"), console=console, transient=False,
    )
    task = None
    with progress:
        def update(participant: str, i: int, n: int) -> None:
            nonlocal task
            if task is None:
                task = progress.add_task(total_label, total=n, current="")
            progress.update(task, completed=i, current=participant)

        yield update
        if task is not None:
            progress.update(task, completed=progress.tasks[0].total, current="done")
