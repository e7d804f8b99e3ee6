"""Issue 12 item 14: no text of an EDF header's patient and recording fields (bytes 8-168) reaches an
output, a message, the cache or a screen, whatever the header's layout.

Header layout: EDF specification (Kemp et al. 1992) and EDF+ (Kemp & Olivan
2003): version 8 bytes, patient 80, recording 80, start date 8, start time 8,
... The malformed headers are built here byte by byte (tests/edf_builders.py);
every name is invented.
"""

from __future__ import annotations

import datetime as dt
import re
import shutil
import sqlite3
from pathlib import Path

import pytest

from edf_builders import write_edf_plus
from sleepfuse.cli.main import main
from sleepfuse.model.errors import ReadError
from sleepfuse.readers.edf import read_hypnogram

SAMPLE = Path(__file__).resolve().parents[1] / "sample_records"
START = dt.datetime(2026, 10, 31, 22, 30, 0)
PATIENT = "Jo Quillfeather_Zorabeth 17-OCT-1963 XQZ-907316"  # invented; "Jo" is a two-letter name
RECORDING = "Startdate 30-OCT-2026 Vexmoor_Sleeplab Tech_Ulrikka Bq"  # date disagrees with the header
LONG_SECRETS = ("Quillfeather", "Zorabeth", "1963", "907316", "Vexmoor", "Sleeplab", "Ulrikka")
SHORT_SECRETS = ("Jo", "Bq")
STAGES = [(0, 30, "W"), (30, 60, "N2"), (90, 30, "Sleep stage Jo"), (120, 30, "stage Bq"), (150, 60, "N3")]


def _leaks(text: str) -> list[str]:
    found = [s for s in LONG_SECRETS if s.lower() in text.lower()]
    found += [s for s in SHORT_SECRETS if re.search(rf"(?<![A-Za-z0-9]){s}(?![A-Za-z0-9])", text, re.IGNORECASE)]
    return found


def _valid(path: Path) -> Path:
    return write_edf_plus(path, start=START, patient=PATIENT, recording=RECORDING, annotations=STAGES,
                          record_duration_s=30)


def _shifted(path: Path, extra: int) -> Path:
    """An over-long patient field: ``extra`` more bytes of name, and everything after it moved along."""
    raw = _valid(path).read_bytes()
    path.write_bytes(raw[:88] + (b" Zorabeth Quillfeather Vexmoor Jo" * 4)[:extra] + raw[88:])
    return path


def _recording_in_the_date(path: Path) -> Path:
    raw = bytearray(_valid(path).read_bytes())
    raw[168:184] = b"Ulrikka Vexmoor "  # recording text where the start date and time belong
    path.write_bytes(bytes(raw))
    return path


@pytest.mark.parametrize("extra", [1, 8, 30, 80, 120])
def test_shifted_header_error_quotes_no_header_text(tmp_path, extra):
    with pytest.raises(ReadError) as info:
        read_hypnogram(_shifted(tmp_path / "P09_x.edf", extra), "UTC")
    assert _leaks(str(info.value)) == [], str(info.value)


def test_recording_text_in_the_date_field_is_not_quoted(tmp_path):
    with pytest.raises(ReadError) as info:
        read_hypnogram(_recording_in_the_date(tmp_path / "P09_x.edf"), "UTC")
    assert "not dd.mm.yy" in str(info.value) and _leaks(str(info.value)) == []


def test_valid_header_with_names_in_both_fields_leaks_nothing(tmp_path):
    h = read_hypnogram(_valid(tmp_path / "P09_x.edf"), "UTC")
    assert h.unknown_labels and h.problems  # unknown stage labels and the Startdate note: text to leak through
    texts = [repr(p) for p in h.problems] + list(h.unknown_labels)
    assert _leaks(" ".join(texts)) == [], texts
    assert any("Joint" in t or "***" in t for t in texts)


def test_short_tokens_are_scrubbed_as_whole_words_only():
    from sleepfuse.readers.edf import _scrub

    assert _scrub("Sleep stage Jo; Joint artefact; jo_2", ["Jo"]) == "Sleep stage ***; Joint artefact; ***_2"


def test_nothing_of_the_header_reaches_outputs_console_cache_or_app(tmp_path, capsys):
    study = tmp_path / "study"
    for sub in ("psg", "actigraphy", "diary"):
        (study / sub).mkdir(parents=True)
    shutil.copy(SAMPLE / "study.toml", study / "study.toml")
    for src in SAMPLE.glob("*/P01_*"):
        shutil.copy(src, study / src.parent.name / src.name)
    _valid(study / "psg" / "P02_valid.edf")
    _shifted(study / "psg" / "P03_shifted.edf", 40)
    _recording_in_the_date(study / "psg" / "P04_date.edf")
    out = tmp_path / "out"
    assert main(["batch", str(study), "--out", str(out), "--report"]) in (0, 1)
    console = capsys.readouterr().err
    assert "P03_shifted.edf" in console  # the bad files are reported ...
    assert _leaks(console) == [], console  # ... without their header text
    for path in out.rglob("*"):
        if path.is_file():
            assert _leaks(path.read_text(encoding="utf-8", errors="replace")) == [], path.name
    with sqlite3.connect(study / ".sleepfuse-cache" / "outcomes.sqlite") as conn:
        blobs = b" ".join(bytes(r[0]) for r in conn.execute("SELECT blob FROM outcomes"))
    assert blobs and _leaks(blobs.decode("utf-8")) == []

    from sleepfuse.run.session import Workspace

    ws = Workspace.load(study)  # what the app's panels show
    shown = [e.message for e in ws.qc] + [str(ws.participant_summary(p)) for p in ws.participants]
    assert _leaks(" ".join(shown)) == []
