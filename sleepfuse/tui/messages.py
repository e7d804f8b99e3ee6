"""Messages that workers post back to screens (workers never touch widgets)."""

from __future__ import annotations

from pathlib import Path

import pandas as pd
from textual.message import Message


class StudyPlanned(Message):
    """The study's files were found: these participants will be scored."""

    def __init__(self, participants: list[str]) -> None:
        super().__init__()
        self.participants = participants


class ParticipantsScored(Message):
    """A chunk of participants was scored: their night rows (review decisions applied)."""

    def __init__(self, nights: pd.DataFrame, cells: dict, done: int, total: int) -> None:
        super().__init__()
        self.nights, self.cells, self.done, self.total = nights, cells, done, total


class StudyLoaded(Message):
    """Every participant is scored; the workspace is complete."""

    def __init__(self, workspace) -> None:
        super().__init__()
        self.workspace = workspace


class StudyFailed(Message):
    """The study could not be opened (configuration or discovery error)."""

    def __init__(self, error: str) -> None:
        super().__init__()
        self.error = error


class NightScored(Message):
    """The epoch detail of one participant-night is ready to draw."""

    def __init__(self, participant: str, night: str, picture) -> None:
        super().__init__()
        self.participant, self.night, self.picture = participant, night, picture


class ExportProgressed(Message):
    """A step of the export moved on: ``step`` is "participants", "figures" or "report"."""

    def __init__(self, participant: str, done: int, total: int, *, step: str = "participants") -> None:
        super().__init__()
        self.participant, self.done, self.total, self.step = participant, done, total, step


class ExportFinished(Message):
    def __init__(self, written: list[Path], error: str = "") -> None:
        super().__init__()
        self.written, self.error = written, error


class ClustersFitted(Message):
    """A clustering preview run finished (``run`` tells stale results from the latest); ``tables`` are
    (outcome tests or None, profiles, participants missing from the outcomes table, where the outcomes
    came from or why there are none)."""

    def __init__(self, run: int, result, tables=None) -> None:
        super().__init__()
        self.run, self.result, self.tables = run, result, tables


class ClustersProgress(Message):
    """A clustering preview run reports how far it has got (shown on the status line)."""

    def __init__(self, run: int, text: str) -> None:
        super().__init__()
        self.run, self.text = run, text


class ClustersFailed(Message):
    """A clustering preview run could not start (e.g. no column matches the patterns typed)."""

    def __init__(self, run: int, error: str) -> None:
        super().__init__()
        self.run, self.error = run, error
