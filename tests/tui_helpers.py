"""Shared helpers of the terminal-interface tests: the demo study scored once, copies for review tests."""

from __future__ import annotations

import shutil
from pathlib import Path

from textual.widgets import DataTable

SAMPLE = Path(__file__).resolve().parents[1] / "sample_records"


def copy_study(dest: Path) -> Path:
    """A private copy of the demo study (review decisions are written beside the study, never into the repo)."""
    shutil.copytree(SAMPLE, dest, ignore=shutil.ignore_patterns("sleepfuse-review.csv", "generate.py", ".sleepfuse-cache"))
    return dest


async def settle(pilot) -> None:
    """Let every worker finish and every message be handled (no sleeping)."""
    await pilot.app.workers.wait_for_complete()
    await pilot.pause()
    await pilot.app.workers.wait_for_complete()
    await pilot.pause()


async def goto_cell(pilot, participant: str, night: str) -> None:
    """Put the overview cursor on a participant-night."""
    screen = pilot.app.screen
    table = screen.query_one("#grid", DataTable)
    table.move_cursor(row=screen.row_pids.index(participant), column=screen.nights.index(night) + 1, animate=False)
    await pilot.pause()


def run_async(test):
    """Run an async test with asyncio.run (the suite has no async test plugin)."""
    import asyncio
    import functools

    @functools.wraps(test)
    def wrapper(*args, **kwargs):
        return asyncio.run(test(*args, **kwargs))

    return wrapper


async def burst(pilot, *keys: str) -> None:
    """Send every key at once, with no pause between them (as typed-ahead keys arrive over SSH), then settle.

    ``pilot.press`` waits for the app to idle after each key, which hides ordering
    bugs; this puts all the key events in the app's queue before any is handled.
    """
    from textual import events
    from textual.keys import _character_to_key

    app = pilot.app
    for key in keys:  # single characters ('[', '?') or key names ('enter', 'down')
        name = _character_to_key(key) if len(key) == 1 and not key.isalnum() else key
        event = events.Key(name, key if len(key) == 1 else None)
        event.set_sender(app)
        app._driver.send_message(event)
    await settle(pilot)
