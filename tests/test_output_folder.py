"""Issue 12 items 7, 10, 11, 12 and issue 15 item 3: the batch output folder.

Common practice for command-line tools: a wrong output path is a usage error
(exit status 2, a message, no traceback); an output folder holds one run's
files; files a tool did not write are never deleted; new files follow the
umask as ``open(path, "w")`` does (POSIX open(2): mode 0666 & ~umask).
"""

from __future__ import annotations

import json
import os
import stat
from pathlib import Path

import pytest
from conftest import copy_demo_participants

import sleepfuse.run.batch as batch_mod
from sleepfuse.cli.main import main
from sleepfuse.run.batch import BatchInterrupted, BatchOptions, run_batch

SAMPLE = Path(__file__).resolve().parents[1] / "sample_records"


@pytest.fixture
def study(tmp_path):
    root = copy_demo_participants(tmp_path / "study")
    return root


def _batch(study, out, *extra):
    return main(["batch", str(study), "--out", str(out), "--no-cache", *extra])


# --- item 7: --out an existing file or a folder that cannot be written -------------------------------

def test_out_is_an_existing_file(study, tmp_path, capsys):
    target = tmp_path / "results.csv"
    target.write_text("keep me\n")
    assert _batch(study, target) == 2
    err = capsys.readouterr().err
    assert "existing file" in err and "Traceback" not in err
    assert target.read_text() == "keep me\n"


@pytest.mark.skipif(os.geteuid() == 0, reason="root may write in any folder")
def test_out_folder_not_writable(study, tmp_path, capsys):
    locked = tmp_path / "locked"
    locked.mkdir()
    locked.chmod(0o500)
    try:
        assert _batch(study, locked) == 2
        assert _batch(study, locked / "sub") == 2
    finally:
        locked.chmod(0o700)
    err = capsys.readouterr().err
    assert "cannot write" in err or "cannot create" in err
    assert "Traceback" not in err


def test_out_below_a_file_cannot_be_created(study, tmp_path, capsys):
    (tmp_path / "afile").write_text("x")
    assert _batch(study, tmp_path / "afile" / "out") == 2
    assert "Traceback" not in capsys.readouterr().err


def test_unwritable_out_is_refused_before_scoring(study, tmp_path, monkeypatch):
    from sleepfuse.model.errors import OutputFolderError

    def no_scoring(*a, **k):
        raise AssertionError("scored before checking --out")

    monkeypatch.setattr(batch_mod, "run_cached", no_scoring)
    (tmp_path / "f").write_text("x")
    with pytest.raises(OutputFolderError):
        run_batch(study, BatchOptions(out=tmp_path / "f", cache=False), argv=["t"])


# --- item 12: --out inside the study -----------------------------------------------------------------

@pytest.mark.parametrize("inside", [".", "results", "psg/out", "diary"])
def test_out_inside_the_study_is_refused(study, inside, capsys):
    before = sorted(str(p.relative_to(study)) for p in study.rglob("*"))
    assert _batch(study, study / inside) == 2
    err = capsys.readouterr().err
    assert "inside the study" in err and "Traceback" not in err
    assert sorted(str(p.relative_to(study)) for p in study.rglob("*")) == before


def test_out_inside_the_study_through_a_link_is_refused(study, tmp_path, capsys):
    (tmp_path / "link").symlink_to(study)
    assert _batch(study, tmp_path / "link" / "results") == 2
    assert "inside the study" in capsys.readouterr().err


# --- item 11: stale tables ------------------------------------------------------------------------

def test_other_format_leaves_only_this_runs_files_and_keeps_foreign_ones(study, tmp_path, capsys):
    out = tmp_path / "out"
    assert _batch(study, out, "--plots") == 0
    first = sorted(p.name for p in out.iterdir())
    assert "nights.csv" in first and (out / "plots").is_dir()
    (out / "my_notes.txt").write_text("the analyst's own file\n")
    capsys.readouterr()
    assert _batch(study, out, "--format", "parquet") == 0
    err = capsys.readouterr().err
    listed = json.loads((out / "provenance.json").read_text())["outputs"]
    on_disk = sorted(str(p.relative_to(out)) for p in out.rglob("*") if p.is_file())
    assert sorted(listed + ["provenance.json", "my_notes.txt"]) == on_disk  # this run's files, and the foreign one
    assert not (out / "nights.csv").exists() and not (out / "plots").exists()
    assert (out / "my_notes.txt").read_text() == "the analyst's own file\n"
    assert "my_notes.txt" in err and "not written by this run" in err


def test_another_study_into_the_same_folder_replaces_the_outputs(study, tmp_path):
    out = tmp_path / "out"
    run_batch(study, BatchOptions(out=out, cache=False, plots=True), argv=["t"])
    result = run_batch(study, BatchOptions(out=out, cache=False, plots=False), argv=["t"])
    on_disk = sorted(str(p.relative_to(out)) for p in out.rglob("*") if p.is_file())
    assert on_disk == sorted(result.provenance["outputs"] + ["provenance.json"])


def test_provenance_never_leads_deletion_outside_the_folder(study, tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    victim = tmp_path / "victim.csv"
    victim.write_text("x")
    (out / "provenance.json").write_text(json.dumps({"outputs": ["../victim.csv", str(victim)]}))
    run_batch(study, BatchOptions(out=out, cache=False), argv=["t"])
    assert victim.read_text() == "x"


# --- item 10: interruptions and left-over temporary files ----------------------------------------

def test_temporary_files_of_a_killed_run_are_removed_by_the_next(study, tmp_path):
    out = tmp_path / "out"
    (out / "plots").mkdir(parents=True)
    leftovers = [out / ".nights.csv.k2j4h5g6.tmp", out / "plots" / ".P_tst_psg.png.a1b2c3d4.tmp"]
    for p in leftovers:
        p.write_text("half")
    (out / "keep.tmp").write_text("not ours")
    result = run_batch(study, BatchOptions(out=out, cache=False, plots=True), argv=["t"])
    assert not any(p.exists() for p in leftovers)
    assert (out / "keep.tmp").exists()
    assert any("temporary" in n for n in result.notes)


def test_ctrl_c_while_writing_removes_this_runs_tables_and_says_what_is_left(study, tmp_path, monkeypatch, capsys):
    out = tmp_path / "out"
    out.mkdir()
    (out / "my_notes.txt").write_text("mine")
    real = batch_mod.write_table
    count = {"n": 0}

    def interrupted(df, base, fmt):
        count["n"] += 1
        if count["n"] == 3:
            raise KeyboardInterrupt
        return real(df, base, fmt)

    monkeypatch.setattr(batch_mod, "write_table", interrupted)
    assert _batch(study, out) == 130
    err = capsys.readouterr().err
    left = sorted(p.name for p in out.iterdir())
    assert left == ["my_notes.txt"]  # the two tables this run had written are gone, no temporary file
    assert "my_notes.txt" in err and "removed" in err and "no partial output" not in err


def test_ctrl_c_before_writing_says_nothing_was_written(study, tmp_path, monkeypatch, capsys):
    def interrupted(*a, **k):
        raise KeyboardInterrupt

    monkeypatch.setattr(batch_mod, "run_cached", interrupted)
    assert _batch(study, tmp_path / "out") == 130
    assert "nothing of this run was written" in capsys.readouterr().err


def test_batch_interrupted_message_names_the_files_left():
    exc = BatchInterrupted(Path("/x/out"), ["agreement.csv", "matrix.csv"])
    assert "agreement.csv, matrix.csv" in str(exc) and "no provenance.json" in str(exc)


# --- issue 15 item 3: every output follows the umask ----------------------------------------------

@pytest.mark.parametrize("umask", [0o027, 0o002])
def test_atomic_writes_follow_the_umask(tmp_path, umask):
    from sleepfuse.output.files import write_bytes, write_chunks, write_text, write_with

    old = os.umask(umask)
    try:
        paths = [write_text(tmp_path / "a.txt", "x"), write_bytes(tmp_path / "b.bin", b"x"),
                 write_chunks(tmp_path / "c.csv", ["x"]), write_with(tmp_path / "d.png", lambda t: t.write_bytes(b"x"))]
    finally:
        os.umask(old)
    for p in paths:
        assert stat.S_IMODE(p.stat().st_mode) == 0o666 & ~umask, p.name


def test_every_batch_output_and_the_review_file_follow_the_umask(study, tmp_path):
    from sleepfuse.study.review import record_decision

    umask = 0o027
    out = tmp_path / "out"
    old = os.umask(umask)
    try:
        record_decision(study, "P01", "2026-10-28", "actigraphy", "exclude", "watch off")
        run_batch(study, BatchOptions(out=out, cache=False, plots=True, report=True), argv=["t"])
    finally:
        os.umask(old)
    files = [p for p in out.rglob("*") if p.is_file()] + [study / "sleepfuse-review.csv"]
    assert any(p.suffix == ".png" for p in files) and (out / "report.html").is_file()
    for p in files:
        assert stat.S_IMODE(p.stat().st_mode) == 0o666 & ~umask, p.name


def test_out_folder_that_refuses_writing_is_a_usage_error(study, tmp_path, monkeypatch, capsys):
    import sleepfuse.run.outdir as outdir

    def refused(*a, **k):
        raise PermissionError(13, "Permission denied")

    monkeypatch.setattr(outdir.tempfile, "mkstemp", refused)
    (tmp_path / "out").mkdir()
    assert _batch(study, tmp_path / "out") == 2
    err = capsys.readouterr().err
    assert "cannot write in the output folder" in err and "Permission denied" in err and "Traceback" not in err


def test_missing_out_under_a_folder_that_refuses_writing(study, tmp_path, monkeypatch, capsys):
    import sleepfuse.run.outdir as outdir

    monkeypatch.setattr(outdir.os, "access", lambda path, mode: False)
    assert _batch(study, tmp_path / "new" / "out") == 2
    err = capsys.readouterr().err
    assert "is not writable" in err and "Traceback" not in err
    assert not (tmp_path / "new").exists()  # nothing created for a run that cannot write
