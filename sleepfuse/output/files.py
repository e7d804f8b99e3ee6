"""Atomic output: write to a temporary file in the same folder, then rename.

An interrupted run never leaves a half-written table that looks complete.
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from pathlib import Path
from typing import Iterable, Iterator


@contextlib.contextmanager
def atomic_path(path: str | Path, mode: int = 0o644) -> Iterator[Path]:
    """Yield a temporary path beside ``path``; on success rename it over ``path``."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    os.close(fd)
    tmp_path = Path(tmp)
    try:
        yield tmp_path
        os.chmod(tmp_path, mode)
        os.replace(tmp_path, path)
    finally:
        tmp_path.unlink(missing_ok=True)


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
