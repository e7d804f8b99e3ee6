"""The pair-and-parameter line shared by the disagreement and agreement screens."""

from __future__ import annotations

from rich.text import Text

from sleepfuse.model.definitions import PARAMETERS, SOURCE_NAMES
from sleepfuse.run.session import PairChoice


def pair_title(test: str, reference: str) -> str:
    """A pair as people read it: 'diary − PSG' (test minus reference), where the files say 'diary-psg'."""
    return f"{SOURCE_NAMES[test]} − {SOURCE_NAMES[reference]}"


def choice_line(choice: PairChoice, extra: str = "") -> Text:
    unit = PARAMETERS[choice.parameter].unit if choice.parameter in PARAMETERS else ""
    t = Text()
    t.append(" pair ", style="dim")
    t.append(pair_title(*choice.pair), style="bold")
    t.append(" (p)  parameter ", style="dim")
    t.append(f"{choice.parameter}", style="bold")
    t.append(f" [{unit}] (v)", style="dim")
    if extra:
        t.append(f"  {extra}", style="dim")
    return t
