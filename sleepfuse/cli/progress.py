"""Progress on stderr for long runs (rich), silent when stderr is not a terminal unless asked."""

from __future__ import annotations

import contextlib
from typing import Callable, Iterator

Update = Callable[[str, int, int], None]
"""``update(item, i, n)``: i of n done, working on ``item`` ("" when finished)."""


def _silent(item: str, i: int, n: int) -> None:
    return None


@contextlib.contextmanager
def progress_bars(*, enabled: bool | None = None) -> Iterator[Callable[[str], Update]]:
    """Yield ``bar(label)``, which gives the ``update`` of a bar of that label on stderr.

    Every label gets its own bar in one live display (participants, figures,
    report), added when its first update arrives, so a run never sits silent
    between two steps. Bars left short of their total are completed at the end.
    """
    from rich.console import Console
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

    console = Console(stderr=True)
    show = console.is_terminal if enabled is None else enabled
    if not show:
        yield lambda label: _silent
        return
    progress = Progress(
        TextColumn("[bold]{task.description:<12}"), BarColumn(), MofNCompleteColumn(), TimeElapsedColumn(),
        TextColumn("{task.fields[current]}"), console=console, transient=False,
    )
    tasks: dict[str, int] = {}

    def bar(label: str) -> Update:
        def update(item: str, i: int, n: int) -> None:
            if label not in tasks:
                tasks[label] = progress.add_task(label, total=n, current="")
            progress.update(tasks[label], total=n, completed=i, current=item)

        return update

    with progress:
        yield bar
        for task in progress.tasks:
            progress.update(task.id, completed=task.total, current="done")


@contextlib.contextmanager
def participant_progress(total_label: str = "participants", *, enabled: bool | None = None) -> Iterator[Update]:
    """Yield ``update(participant, i, n)`` of one bar on stderr."""
    with progress_bars(enabled=enabled) as bar:
        yield bar(total_label)
