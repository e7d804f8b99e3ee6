"""How QC entries and provenance name a file: relative to the study root, as pathlib's relative_to gives it."""

from __future__ import annotations

from pathlib import Path

import pytest

from sleepfuse.model.qc import study_path

ROOT = Path("/data/my study")


@pytest.mark.parametrize("path", [
    ROOT / "psg" / "P01_n1.edf", ROOT / "diary.csv", Path("/data/my study2/x.csv"), ROOT, Path("/elsewhere/a.csv"),
    Path("relative/a.csv"), ROOT / "a" / ".." / "b.csv",
])
def test_study_path_is_pathlib_relative_to_or_the_path_itself(path):
    try:
        expected = str(path.relative_to(ROOT))
    except ValueError:
        expected = str(path)
    assert study_path(path, ROOT) == expected
    assert study_path(str(path), str(ROOT)) == expected  # text in, the same answer


def test_study_path_under_the_file_system_root():
    assert study_path(Path("/a/b.csv"), Path("/")) == str(Path("/a/b.csv").relative_to("/"))
