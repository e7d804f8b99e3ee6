"""The export folder last used for each study, remembered between sessions of the app.

Kept in the user's configuration folder (``$XDG_CONFIG_HOME/sleepfuse/``,
else ``~/.config/sleepfuse/``; common practice on Linux and macOS
terminals), never beside the study, so the study folder and a clone stay
clean. It is a convenience: a file that cannot be read or written is
ignored, and the dialog falls back to its default.
"""

from __future__ import annotations

import json
import os
from pathlib import Path

from sleepfuse.output.files import write_text

RECENT_FILE = "export-folders.json"
MAX_STUDIES = 50
"""Studies remembered; the oldest are forgotten first."""


def config_dir() -> Path:
    base = os.environ.get("XDG_CONFIG_HOME") or str(Path.home() / ".config")
    return Path(base) / "sleepfuse"


def _load() -> dict[str, str]:
    try:
        data = json.loads((config_dir() / RECENT_FILE).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return {}
    return {str(k): str(v) for k, v in data.items()} if isinstance(data, dict) else {}


def _key(study: Path) -> str:
    return str(Path(study).resolve())


def remembered_export(study: Path) -> Path | None:
    """The folder the last export of this study went to, or None."""
    folder = _load().get(_key(study))
    return Path(folder) if folder else None


def remember_export(study: Path, folder: Path) -> bool:
    """Remember ``folder`` as this study's export folder; False when it could not be saved."""
    data = _load()
    data.pop(_key(study), None)
    data[_key(study)] = str(Path(folder).resolve())
    data = dict(list(data.items())[-MAX_STUDIES:])
    try:
        write_text(config_dir() / RECENT_FILE, json.dumps(data, indent=1) + "\n")
    except OSError:
        return False
    return True
