"""What every sub-command shares: exit codes and the STUDY argument type."""

from __future__ import annotations

import argparse
from pathlib import Path

EXIT_OK, EXIT_NOTHING, EXIT_USAGE = 0, 1, 2


def study_dir(value: str) -> Path:
    """argparse type of a STUDY argument: an existing folder."""
    path = Path(value)
    if not path.is_dir():
        raise argparse.ArgumentTypeError(f"{value!r} is not a folder; give the study folder (with psg/, actigraphy/, diary/)")
    return path
