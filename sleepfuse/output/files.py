"""Atomic output: write to a temporary file in the same folder, then rename.

An interrupted run never leaves a half-written table that looks complete.
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from pathlib import Path
from typing import Callable, Iterable, Iterator


@contextlib.contextmanager
def atomic_path(path: str | Path, mode: int | None = None) -> Iterator[Path]:
    """Yield a temporary path beside ``path``; on success rename it over ``path``.

    The file gets the permissions a plain ``open(path, "w")`` would give it
    (0666 less the process's umask), not mkstemp's private 0600, unless
    ``mode`` is given."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    os.close(fd)
    tmp_path = Path(tmp)
    try:
        yield tmp_path
        os.chmod(tmp_path, mode if mode is not None else 0o666 & ~current_umask())
        os.replace(tmp_path, path)
    finally:
        tmp_path.unlink(missing_ok=True)


def current_umask() -> int:
    """The process's umask, read without changing it where the system tells it (Linux /proc)."""
    try:
        with open("/proc/self/status", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("Umask:"):
                    return int(line.split()[1], 8)
    except (OSError, ValueError, IndexError):
        pass
    mask = os.umask(0o022)  # elsewhere: read by setting it, and put it back at once
    os.umask(mask)
    return mask



def write_bytes(path: str | Path, data: bytes) -> Path:
    with atomic_path(path) as tmp:
        tmp.write_bytes(data)
    return Path(path)


def write_chunks(path: str | Path, chunks: Iterable[str]) -> Path:
    """Write text given in pieces (UTF-8, newlines as given), atomically."""
    with atomic_path(path) as tmp:
        with open(tmp, "w", encoding="utf-8", newline="") as fh:
            for chunk in chunks:
                fh.write(chunk)
    return Path(path)


def write_text(path: str | Path, text: str) -> Path:
    with atomic_path(path) as tmp:
        with open(tmp, "w", encoding="utf-8", newline="") as fh:
            fh.write(text)
    return Path(path)


def write_with(path: str | Path, write: Callable[[Path], None]) -> Path:
    """Call ``write(tmp_path)`` for a temporary file beside ``path``, then move it into place."""
    with atomic_path(path) as tmp:
        write(tmp)
    return Path(path)


def write_csv(frame, path: str | Path) -> Path:
    """Write a DataFrame as CSV (no index) atomically."""
    return write_with(path, lambda tmp: frame.to_csv(tmp, index=False))
