"""One module per screen; each screen's stylesheet is ``sleepfuse/tui/<screen>.tcss``."""

from pathlib import Path

TCSS = Path(__file__).resolve().parent.parent


def tcss(name: str) -> Path:
    """Path of a screen's stylesheet (kept in sleepfuse/tui/ so the package data glob ships it)."""
    return TCSS / f"{name}.tcss"
