"""Errors raised at the edges of sleepfuse: unreadable files and bad configuration."""

from __future__ import annotations

from pathlib import Path


class SleepfuseError(Exception):
    """Base class of every error sleepfuse raises on purpose."""


class ReadError(SleepfuseError):
    """A source file could not be read; names the file and the reason."""

    def __init__(self, path: str | Path, reason: str):
        self.path = Path(path)
        self.reason = reason
        super().__init__(f"{self.path}: {reason}")


class ConfigError(SleepfuseError):
    """study.toml (or a command-line option) holds a value sleepfuse cannot use."""

    def __init__(self, key: str, value: object, allowed: str, path: str | Path | None = None):
        self.key = key
        self.value = value
        self.allowed = allowed
        self.path = Path(path) if path is not None else None
        where = f"{self.path}: " if self.path is not None else ""
        super().__init__(f"{where}{key} = {value!r} is not valid; allowed: {allowed}")


class OutputFolderError(SleepfuseError):
    """The output folder cannot be used (an existing file, not writable, inside the study)."""
