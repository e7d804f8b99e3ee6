"""The batch output folder: checked before scoring, tidied before writing, left with this run's files only.

- ``check_out`` refuses, before any work, an ``--out`` that is an existing
  file, a folder that cannot be created or written, or a folder inside the
  study (the next run would read its own tables as input).
- ``remove_leftover_temps`` deletes temporary files that an earlier run,
  killed while saving, left behind (``.<name>.<random>.tmp``, the names
  ``sleepfuse.output.files.atomic_path`` gives them).
- ``earlier_outputs`` reads what an earlier run's provenance.json lists;
  ``remove_stale`` deletes those of them this run did not write again, and
  ``foreign_files`` names whatever else lies there: sleepfuse never deletes
  a file it did not write.
"""

from __future__ import annotations

import json
import os
import re
import tempfile
from pathlib import Path

from sleepfuse.model.errors import OutputFolderError

PROVENANCE = "provenance.json"
_TEMP = re.compile(r"^\..+\.[a-z0-9_]{8}\.tmp$")  # mkstemp(prefix=".<name>.", suffix=".tmp")
_SUBFOLDERS = ("plots",)


def check_out(out: Path, study: Path) -> None:
    """Raise OutputFolderError with what to do when ``out`` cannot take the outputs."""
    out = Path(out)
    try:
        inside = out.resolve().is_relative_to(Path(study).resolve())
    except OSError:
        inside = False
    if inside:
        raise OutputFolderError(
            f"--out {out} is inside the study folder {study}; the next run would read its own tables as "
            f"input. Choose a folder outside the study, e.g. --out {Path(study).resolve().parent / 'results'}")
    if out.exists() and not out.is_dir():
        raise OutputFolderError(f"--out {out} is an existing file, not a folder; give a folder to write the tables into")
    if not out.exists():  # created only when the outputs are written: check where it would go
        parent = out.absolute().parent
        while not parent.exists() and parent != parent.parent:
            parent = parent.parent
        if not parent.is_dir():
            raise OutputFolderError(f"cannot create the output folder {out}: {parent} is a file, not a folder")
        if not os.access(parent, os.W_OK | os.X_OK):
            raise OutputFolderError(f"cannot create the output folder {out}: {parent} is not writable; "
                                    f"choose another --out or change the folder's permissions")
        return
    try:  # the only sure test of writing is to write (permissions, read-only mounts, ACLs)
        fd, probe = tempfile.mkstemp(dir=out, prefix=".sleepfuse-probe.", suffix=".tmp")
        os.close(fd)
        os.unlink(probe)
    except OSError as exc:
        raise OutputFolderError(f"cannot write in the output folder {out}: {exc.strerror or exc}; "
                                f"choose another --out or change the folder's permissions") from None


def make_out(out: Path) -> None:
    """Create the output folder (after scoring), with the same clear error as ``check_out``."""
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise OutputFolderError(f"cannot create the output folder {out}: {exc.strerror or exc}") from None


def remove_leftover_temps(out: Path) -> list[str]:
    """Delete temporary files a killed run left in ``out`` and its plots/; returns their relative names."""
    removed = []
    for folder in (out, *(out / s for s in _SUBFOLDERS)):
        if not folder.is_dir():
            continue
        for entry in folder.iterdir():
            if _TEMP.match(entry.name) and entry.is_file() and not entry.is_symlink():
                try:
                    entry.unlink()
                    removed.append(str(entry.relative_to(out)))
                except OSError:
                    pass
    return sorted(removed)


def earlier_outputs(out: Path) -> list[str]:
    """The outputs an earlier run's provenance.json lists (relative names), [] without a readable one."""
    try:
        listed = json.loads((out / PROVENANCE).read_text(encoding="utf-8")).get("outputs", [])
    except (OSError, ValueError, AttributeError):
        return []
    names = []
    for name in listed if isinstance(listed, list) else []:
        if not isinstance(name, str):
            continue
        rel = Path(name)
        if rel.is_absolute() or ".." in rel.parts:
            continue  # never follow a provenance file out of the output folder
        if len(rel.parts) == 1 and rel.suffix in (".png", ".svg"):
            rel = Path("plots") / rel  # provenance of earlier versions listed figures by bare name
        names.append(str(rel))
    return names


def remove_stale(out: Path, earlier: list[str], written: list[Path]) -> list[str]:
    """Delete what an earlier run wrote (``earlier``) that this run did not write again."""
    keep = {str(Path(p).resolve()) for p in written}
    removed = []
    for name in earlier:
        path = out / name
        if str(path.resolve()) in keep or not path.is_file() or path.is_symlink():
            continue
        try:
            path.unlink()
            removed.append(name)
        except OSError:
            pass
    for sub in _SUBFOLDERS:  # an emptied plots/ goes too
        try:
            (out / sub).rmdir()
        except OSError:
            pass
    return removed


def foreign_files(out: Path, written: list[Path]) -> list[str]:
    """Entries in ``out`` (and plots/) that this run did not write: never deleted, only named."""
    mine = {str(Path(p).resolve()) for p in written}
    found = []
    for folder in (out, *(out / s for s in _SUBFOLDERS)):
        if not folder.is_dir():
            continue
        for entry in sorted(folder.iterdir()):
            if folder == out and entry.name in _SUBFOLDERS and entry.is_dir():
                continue
            if str(entry.resolve()) not in mine:
                found.append(str(entry.relative_to(out)))
    return found


def what_is_left(out: Path) -> list[str]:
    """Every entry in ``out`` and plots/ (for the message after an interruption)."""
    return foreign_files(out, [])
