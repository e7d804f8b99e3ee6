"""The pair-and-parameter line shared by the disagreement and agreement screens."""

from __future__ import annotations

from rich.text import Text

from sleepfuse.model.definitions import PARAMETERS
from sleepfuse.run.session import PairChoice


def choice_line(choice: PairChoice, extra: str = "") -> Text:
    unit = PARAMETERS[choice.parameter].unit if choice.parameter in PARAMETERS else ""
    t = Text()
    t.append(" pair ", style="dim")
    t.append(f"{choice.pair_label}", style="bold")
    t.append(" (p)  parameter ", style="dim")
    t.append(f"{choice.parameter}", style="bold")
    t.append(f" [{unit}] (v)", style="dim")
    if extra:
        t.append(f"  {extra}", style="dim")
    return t
