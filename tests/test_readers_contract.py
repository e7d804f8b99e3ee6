"""One contract for every reader (DESIGN.md house style): a bad file raises ReadError naming the
file and the reason, never a bare traceback, and the source file is never changed."""

from __future__ import annotations

import hashlib

import pytest

from sleepfuse.model.errors import ReadError
from sleepfuse.readers.actigraphy import read_actigraphy
from sleepfuse.readers.diary import read_diary
from sleepfuse.readers.edf import read_hypnogram
from sleepfuse.readers.hypnogram_text import read_text_hypnogram

TZ = "Europe/Berlin"
READERS = {
    "edf": lambda p: read_hypnogram(p, TZ),
    "actigraphy": lambda p: read_actigraphy(p, TZ),
    "diary": lambda p: read_diary(p, TZ, participant="P1"),
    "diary workbook": lambda p: read_diary(p, TZ, participant="P1"),
    "text hypnogram": lambda p: read_text_hypnogram(p, TZ),
}
SUFFIX = {"diary workbook": ".xlsx", "text hypnogram": ".txt"}  # the file type that picks the reader's path
BAD_CONTENTS = {
    "empty": b"",
    "garbage": bytes(range(256)) * 8,
    "text": b"hello, world\nthis is not data\n",
    "nul": b"\x00" * 4096,
}


@pytest.mark.parametrize("reader", READERS)
@pytest.mark.parametrize("content", BAD_CONTENTS)
def test_bad_file_raises_read_error_naming_file(tmp_path, reader, content):
    path = tmp_path / f"P1_{content}{SUFFIX.get(reader, '.dat')}"
    path.write_bytes(BAD_CONTENTS[content])
    before = hashlib.sha256(path.read_bytes()).hexdigest()
    with pytest.raises(ReadError) as info:
        READERS[reader](path)
    assert info.value.path == path and str(path) in str(info.value) and info.value.reason
    assert hashlib.sha256(path.read_bytes()).hexdigest() == before


@pytest.mark.parametrize("reader", READERS)
def test_missing_file_and_folder(tmp_path, reader):
    for path in (tmp_path / f"P1_missing{SUFFIX.get(reader, '.csv')}", tmp_path):
        with pytest.raises(ReadError) as info:
            READERS[reader](path)
        assert str(path) in str(info.value)
