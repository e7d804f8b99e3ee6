"""Atomic writes for the explore outputs, through sleepfuse.output.files (temp file + rename)."""

from __future__ import annotations

from pathlib import Path
from typing import Callable

from sleepfuse.output.files import atomic_path


def write_atomic(path: str | Path, write: Callable[[Path], None]) -> Path:
    """Call ``write(tmp_path)`` for a temporary file beside ``path``, then move it into place."""
    with atomic_path(path) as tmp:
        write(tmp)
    return Path(path)


def write_csv_atomic(frame, path: str | Path) -> Path:
    """Write a DataFrame as CSV (no index) atomically."""
    return write_atomic(path, lambda tmp: frame.to_csv(tmp, index=False))
