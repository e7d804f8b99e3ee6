"""Tests for sleepfuse.run.cache: the incremental cache of scored participants beside the study.

The study is invented (sleepfuse.synthetic.cohort, seeded). The checks count
how often a participant is actually scored (``run_participant`` wrapped) and
compare every output table of a cached run with a full run (common practice
for a cache: same inputs and settings give the same outputs; changed ones
are recomputed; damage is detected and never trusted).
"""

from __future__ import annotations

import datetime as dt
import shutil
import sqlite3

import pandas as pd
import pytest

import sleepfuse.run.engine as engine
import sleepfuse.run.cache as cache_mod
from sleepfuse.run.batch import OUTPUT_TABLES, BatchOptions, run_batch
from sleepfuse.run.cache import CACHE_DIR, CACHE_FILE, decode_outcome, encode_outcome
from sleepfuse.synthetic.cohort import ParticipantPlan, simulate_participant

TZ = "Europe/Berlin"
IDS = ("Q01", "Q02", "Q03")
STUDY_TOML = f'[study]\nname = "cache test (invented)"\ntimezone = "{TZ}"\n[actigraphy]\ncount_scale = 0.01\n'


def write_small_study(root):
    """Three invented participants x 4 days (60-s counts, one PSG night, diary each)."""
    root.mkdir(parents=True, exist_ok=True)
    (root / "study.toml").write_text(STUDY_TOML)
    first = dt.date(2026, 5, 4)
    for i, pid in enumerate(IDS):
        plan = ParticipantPlan(pid, first, 4, psg_nights=[first + dt.timedelta(days=1)])
        simulate_participant(root, plan, TZ, seed=500 + i)
    return root


@pytest.fixture(scope="module")
def template(tmp_path_factory):
    return write_small_study(tmp_path_factory.mktemp("template") / "study")


@pytest.fixture
def study(tmp_path, template):
    root = tmp_path / "study"
    shutil.copytree(template, root)
    return root


@pytest.fixture
def calls(monkeypatch):
    """Participants scored in this test, in order (serial runs call run_participant here)."""
    seen: list[str] = []
    real = engine.run_participant

    def counting(config, job, inputs=None, **kw):
        seen.append(job.participant)
        return real(config, job, inputs, **kw)

    monkeypatch.setattr(engine, "run_participant", counting)
    return seen


def run(root, out, **kw):
    return run_batch(root, BatchOptions(out=out, **kw), argv=["test"])


def assert_same_tables(a, b, skip_qc_messages: tuple[str, ...] = ()):
    for name in OUTPUT_TABLES:
        x, y = a.tables[name], b.tables[name]
        if name == "qc" and skip_qc_messages:
            x = x[~x.message.str.contains("|".join(skip_qc_messages))].reset_index(drop=True)
            y = y[~y.message.str.contains("|".join(skip_qc_messages))].reset_index(drop=True)
        pd.testing.assert_frame_equal(x, y, check_exact=True, obj=name)


def test_second_run_recomputes_nothing_and_gives_the_same_tables(study, tmp_path, calls):
    first = run(study, tmp_path / "o1")
    assert sorted(calls) == list(IDS)
    assert (study / CACHE_DIR / CACHE_FILE).is_file()
    calls.clear()
    second = run(study, tmp_path / "o2")
    assert calls == []
    assert (second.n_recomputed, second.n_from_cache) == (0, len(IDS))
    assert second.provenance["counts"]["participants_from_cache"] == len(IDS)
    assert_same_tables(first, second)
    # provenance still lists every input with its checksum, read afresh
    assert [i["file"] for i in second.provenance["inputs"]] == [i["file"] for i in first.provenance["inputs"]]
    for name in OUTPUT_TABLES:  # the written files are byte-identical too
        assert (tmp_path / "o1" / f"{name}.csv").read_bytes() == (tmp_path / "o2" / f"{name}.csv").read_bytes()


def test_changing_one_file_recomputes_only_that_participant(study, tmp_path, calls):
    run(study, tmp_path / "o1")
    diary = study / "diary" / "Q02_diary.csv"
    lines = diary.read_text().splitlines()
    fields = lines[1].split(",")
    fields[-1] = "1" if fields[-1] != "1" else "5"  # the quality rating of the first night
    lines[1] = ",".join(fields)
    diary.write_text("\n".join(lines) + "\n")
    calls.clear()
    second = run(study, tmp_path / "o2")
    assert calls == ["Q02"]
    assert (second.n_recomputed, second.n_from_cache) == (1, 2)
    full = run(study, tmp_path / "o3", cache=False)
    assert_same_tables(second, full)
    n = second.tables["nights"]
    night = fields[0]
    assert n[(n.participant == "Q02") & (n.source == "diary") & (n.night == night)].quality.iloc[0] == float(fields[-1])


def test_mtime_only_change_is_not_a_change(study, tmp_path, calls):
    # The key is the file's SHA-256, not its time stamp: a re-export with the same bytes is the same input.
    import os

    run(study, tmp_path / "o1")
    path = study / "actigraphy" / "Q01_wrist.csv"
    os.utime(path, (1e9, 1e9))
    calls.clear()
    second = run(study, tmp_path / "o2")
    assert calls == []
    rec = next(i for i in second.provenance["inputs"] if i["file"].endswith("Q01_wrist.csv"))
    assert rec["modified"].startswith("2001-09-09")  # provenance shows the file as it is now


def test_configuration_change_recomputes_everyone(study, tmp_path, calls):
    run(study, tmp_path / "o1")
    (study / "study.toml").write_text(STUDY_TOML.replace("count_scale = 0.01", "count_scale = 0.02"))
    calls.clear()
    second = run(study, tmp_path / "o2")
    assert sorted(calls) == list(IDS)
    assert second.n_from_cache == 0


def test_new_sleepfuse_version_recomputes_everyone(study, tmp_path, calls, monkeypatch):
    run(study, tmp_path / "o1")
    monkeypatch.setattr(cache_mod, "__version__", "999.0")
    calls.clear()
    run(study, tmp_path / "o2")
    assert sorted(calls) == list(IDS)


def test_review_decisions_do_not_invalidate_the_cache(study, tmp_path, calls):
    from sleepfuse.study.review import record_decision

    first = run(study, tmp_path / "o1")
    n = first.tables["nights"]
    night = n[(n.participant == "Q03") & (n.source == "psg")].night.iloc[0]
    record_decision(study, "Q03", night, "psg", "exclude", "electrode came off")
    calls.clear()
    second = run(study, tmp_path / "o2")
    assert calls == []
    n2 = second.tables["nights"]
    row = n2[(n2.participant == "Q03") & (n2.source == "psg")].iloc[0]
    assert not row.included and "electrode came off" in row.qc


def test_damaged_entry_is_recomputed_with_a_qc_note(study, tmp_path, calls):
    first = run(study, tmp_path / "o1")
    db = study / CACHE_DIR / CACHE_FILE
    with sqlite3.connect(db) as conn:  # flip one byte inside Q02's stored outcome
        blob = bytearray(conn.execute("SELECT blob FROM outcomes WHERE participant='Q02'").fetchone()[0])
        blob[len(blob) // 2] ^= 0x01
        conn.execute("UPDATE outcomes SET blob=? WHERE participant='Q02'", (bytes(blob),))
    calls.clear()
    second = run(study, tmp_path / "o2")
    assert calls == ["Q02"]
    qc = second.tables["qc"]
    note = qc[qc.message.str.contains("cache entry damaged")]
    assert len(note) == 1 and note.participant.iloc[0] == "Q02" and note.severity.iloc[0] == "info"
    assert_same_tables(first, second, skip_qc_messages=("cache entry damaged",))
    calls.clear()
    run(study, tmp_path / "o3")  # the recomputed entry was stored again
    assert calls == []


def test_damaged_cache_file_is_set_aside_and_everyone_recomputed(study, tmp_path, calls):
    first = run(study, tmp_path / "o1")
    db = study / CACHE_DIR / CACHE_FILE
    db.write_bytes(b"this is not a database" * 100)
    calls.clear()
    second = run(study, tmp_path / "o2")
    assert sorted(calls) == list(IDS)
    qc = second.tables["qc"]
    assert qc.message.str.contains("cache file could not be read").sum() == 1
    assert list((study / CACHE_DIR).glob(f"{CACHE_FILE}.damaged-*"))
    assert_same_tables(first, second, skip_qc_messages=("cache file could not be read",))


def test_stale_key_in_store_is_not_trusted(study, tmp_path, calls):
    # An entry whose key does not match (e.g. written for other inputs) is recomputed, silently.
    run(study, tmp_path / "o1")
    with sqlite3.connect(study / CACHE_DIR / CACHE_FILE) as conn:
        conn.execute("UPDATE outcomes SET key='0' WHERE participant='Q01'")
    calls.clear()
    run(study, tmp_path / "o2")
    assert calls == ["Q01"]


def test_no_cache_neither_reads_nor_writes_the_cache(study, tmp_path, calls):
    result = run(study, tmp_path / "o1", cache=False)
    assert sorted(calls) == list(IDS)
    assert not (study / CACHE_DIR).exists()
    assert result.provenance["cache"]["used"] is False and result.provenance["options"]["cache"] is False


def test_unwritable_cache_place_falls_back_to_a_full_run_with_a_note(study, tmp_path, calls):
    (study / CACHE_DIR).write_text("a file where the cache folder would go")
    result = run(study, tmp_path / "o1")
    assert sorted(calls) == list(IDS)
    qc = result.tables["qc"]
    note = qc[qc.message.str.contains("incremental cache not used")]
    assert len(note) == 1 and note.severity.iloc[0] == "info"
    assert (study / CACHE_DIR).read_text().startswith("a file")  # nothing of the user's is replaced


def test_source_files_are_never_modified(study, tmp_path):
    import hashlib

    def digests():
        return {p: hashlib.sha256(p.read_bytes()).hexdigest() for p in study.rglob("*")
                if p.is_file() and CACHE_DIR not in p.parts}

    before = digests()
    run(study, tmp_path / "o1")
    run(study, tmp_path / "o2")
    assert digests() == before


def test_outcome_json_round_trip_keeps_nan_bools_and_qc(study, tmp_path):
    import math

    from sleepfuse.model.config import load_config
    from sleepfuse.run.participant import plan_jobs
    from sleepfuse.model.qc import QCLog

    config = load_config(study)
    jobs, _ = plan_jobs(config, QCLog())
    outcome = engine.run_participant(config, jobs[0])
    back = decode_outcome(encode_outcome(outcome))
    assert back.participant == outcome.participant and back.qc == outcome.qc
    assert back.rhythm == outcome.rhythm and back.epoch_rows == outcome.epoch_rows
    for a, b in zip(outcome.rows, back.rows):
        assert a.keys() == b.keys()
        for k in a:
            if isinstance(a[k], float) and math.isnan(a[k]):
                assert math.isnan(b[k])
            else:
                assert a[k] == b[k] and type(b[k]) in (type(a[k]), float, int, bool), k


def test_cli_no_cache_and_counts_on_stderr(study, tmp_path, capsys):
    from sleepfuse.cli.main import main

    assert main(["batch", str(study), "--out", str(tmp_path / "o1")]) == 0
    assert "3 computed, 0 from cache" in capsys.readouterr().err
    assert main(["batch", str(study), "--out", str(tmp_path / "o2")]) == 0
    assert "0 computed, 3 from cache" in capsys.readouterr().err
    assert main(["batch", str(study), "--out", str(tmp_path / "o3"), "--no-cache"]) == 0
    assert "3 computed, 0 from cache" in capsys.readouterr().err


def test_first_run_leaves_checksums_to_the_workers_and_keys_them_alike(study, tmp_path, monkeypatch):
    # An empty cache: nobody can be a hit, so the main process checksums nothing before the run;
    # the keys stored from the workers' checksums must be the ones the next run computes itself.
    hashed: list[int] = []
    real = cache_mod.hash_inputs

    def counting(config, jobs, workers=2):
        hashed.append(len(jobs))
        return real(config, jobs, workers)

    monkeypatch.setattr(cache_mod, "hash_inputs", counting)
    first = run(study, tmp_path / "o1")
    assert sum(hashed) == 0 and first.n_recomputed == len(IDS)
    hashed.clear()
    second = run(study, tmp_path / "o2")
    assert sum(hashed) == len(IDS) and (second.n_recomputed, second.n_from_cache) == (0, len(IDS))
    assert [i["sha256"] for i in second.provenance["inputs"]] == [i["sha256"] for i in first.provenance["inputs"]]


def test_encoded_qc_entries_are_their_dataclass_fields():
    # Reference: dataclasses.asdict (the encoder writes the fields by name; a new field must be added there).
    import json
    from dataclasses import asdict

    from sleepfuse.run.engine import ParticipantOutcome
    from sleepfuse.run.cache import decode_outcome, encode_outcome
    from sleepfuse.model.qc import QCEntry

    entries = [QCEntry("a.csv", "P1", "2026-03-01", "warning", "odd, but kept"), QCEntry("", "P1", "", "info", "é")]
    outcome = ParticipantOutcome("P1", [{"participant": "P1", "tst_min": float("nan")}], {}, [], entries)
    blob = encode_outcome(outcome)
    stored = json.loads(blob)["qc"]
    assert [dict(zip(("file", "participant", "night", "severity", "message"), e)) for e in stored] == \
        [asdict(e) for e in entries]
    assert [f.name for f in __import__("dataclasses").fields(QCEntry)] == ["file", "participant", "night", "severity",
                                                                          "message"]
    assert decode_outcome(blob).qc == entries


def test_outcome_round_trip_keeps_rows_and_their_key_order():
    import math

    from sleepfuse.run.engine import ParticipantOutcome
    from sleepfuse.run.cache import decode_outcome, encode_outcome

    same_keys = [{"participant": "P1", "night": "2026-03-01", "tst_min": 400.5, "included": True},
                 {"participant": "P1", "night": "2026-03-02", "tst_min": float("nan"), "included": False}]
    mixed = [same_keys[0], {"night": "2026-03-03", "participant": "P1", "extra": 1}]
    for rows in (same_keys, mixed, []):
        back = decode_outcome(encode_outcome(ParticipantOutcome("P1", rows, {"IS": 0.5}, [{"n": 1}], [])))
        assert [list(r) for r in back.rows] == [list(r) for r in rows]
        for got, want in zip(back.rows, rows):
            for k in want:
                assert got[k] == want[k] or (math.isnan(got[k]) and math.isnan(want[k]))
        assert back.rhythm == {"IS": 0.5} and back.epoch_rows == [{"n": 1}]


def test_library_versions_equal_the_installed_metadata():
    # Reference: importlib.metadata.version (what pip installed); imported modules answer from __version__.
    import importlib.metadata as md

    import numpy  # noqa: F401
    import pandas  # noqa: F401

    from sleepfuse.run.cache import library_versions

    names = ("numpy", "pandas", "scipy", "pyedflib", "pyarrow", "no-such-library-here")
    got = library_versions(names)
    for name in names[:-1]:
        assert got[name] == md.version(name)
    assert got["no-such-library-here"] == "not installed"


def _flip_bytes(path, fraction, seed):
    """Flip every bit of about ``fraction`` of the file's bytes (seeded), as a failing disk might."""
    import numpy as np

    data = bytearray(path.read_bytes())
    rng = np.random.default_rng(seed)
    for i in rng.choice(len(data), size=max(1, int(len(data) * fraction)), replace=False):
        data[i] ^= 0xFF
    path.write_bytes(bytes(data))


@pytest.mark.parametrize("seed", range(6))
def test_cache_with_flipped_bytes_never_stops_batch(study, tmp_path, seed):
    # issue 12 item 6: ~1% of the bytes flipped gave a UnicodeDecodeError from the connection on every run.
    first = run(study, tmp_path / "o1")
    db = study / CACHE_DIR / CACHE_FILE
    _flip_bytes(db, 0.01, seed)
    damaged = db.read_bytes()
    second = run(study, tmp_path / "o2")  # must not raise, whatever the damage hit
    skip = ("cache file could not be read", "cache entry", "cache unreadable")
    assert_same_tables(first, second, skip_qc_messages=skip)
    aside = list((study / CACHE_DIR).glob(f"{CACHE_FILE}.damaged-*"))
    if aside:  # set aside, never deleted, and said so in qc
        assert any(p.read_bytes() == damaged for p in aside)
        assert second.tables["qc"].message.str.contains("moved to " + CACHE_FILE + ".damaged-").any()
    third = run(study, tmp_path / "o3")  # the next run is clean again
    assert_same_tables(first, third, skip_qc_messages=skip)


def test_undecodable_text_in_the_cache_is_set_aside_with_a_warning(study, tmp_path, calls):
    run(study, tmp_path / "o1")
    with sqlite3.connect(study / CACHE_DIR / CACHE_FILE) as conn:  # text that is not UTF-8
        conn.execute("UPDATE outcomes SET participant = CAST(x'ff00fe' AS TEXT) WHERE participant='Q01'")
    calls.clear()
    second = run(study, tmp_path / "o2")
    assert sorted(calls) == list(IDS)
    qc = second.tables["qc"]
    note = qc[qc.message.str.contains("could not be read")]
    assert len(note) == 1 and note.severity.iloc[0] == "warning"
    assert list((study / CACHE_DIR).glob(f"{CACHE_FILE}.damaged-*"))


@pytest.mark.parametrize("damage", ["garbage", "flipped"])
def test_app_loader_sets_a_damaged_cache_aside_and_scores(study, tmp_path, damage):
    from sleepfuse.run.session import StudyLoader

    run(study, tmp_path / "o1")
    db = study / CACHE_DIR / CACHE_FILE
    if damage == "garbage":
        db.write_bytes(b"\x00\xffnot a database" * 300)
    else:
        with sqlite3.connect(db) as conn:  # undecodable text in the stored key of every row
            conn.execute("UPDATE outcomes SET key = CAST(x'ff00fe' AS TEXT)")
    loader = StudyLoader(study)
    rows = loader.score(loader.participants)
    assert set(rows.participant) == set(IDS)
    assert any("could not be read" in e.message and e.severity == "warning" for e in loader.qc)
    assert list((study / CACHE_DIR).glob(f"{CACHE_FILE}.damaged-*"))


def test_a_participant_stopped_by_a_failure_is_never_cached_whatever_its_messages_say(study, tmp_path, calls,
                                                                                    monkeypatch):
    # Whether an outcome is stored is its explicit ``complete`` flag, set where the outcome is made
    # (common practice for a cache: never keep the result of an unexpected failure), not a QC message's wording.
    import sleepfuse.run.participant as participant

    real = participant.score_participant

    def failing(config, rec, qc):
        if rec.participant == "Q02":
            raise RuntimeError("invented failure")
        if rec.participant == "Q03":  # a complete participant whose message merely reads like a failure
            qc.error("participant not processed: only a message", participant="Q03")
        return real(config, rec, qc)

    monkeypatch.setattr(participant, "score_participant", failing)
    first = run(study, tmp_path / "o1")
    q = first.tables["qc"]
    assert q[(q.participant == "Q02") & q.message.str.startswith("participant not processed: RuntimeError")].shape[0] == 1
    calls.clear()
    second = run(study, tmp_path / "o2")
    assert calls == ["Q02"]  # Q01 and Q03 came from the cache
    assert (second.n_recomputed, second.n_from_cache) == (1, 2)


def test_an_outcome_whose_epoch_agreement_failed_is_not_cached(study, tmp_path, calls, monkeypatch):
    # The epoch agreement is optional (the participant's nights are kept), but its unexpected failure
    # makes the outcome incomplete: the next run computes it again rather than keep the failure.
    real = engine.epoch_rows

    def failing(config, scored, qc):
        if scored.participant == "Q01":
            raise MemoryError("invented")
        return real(config, scored, qc)

    monkeypatch.setattr(engine, "epoch_rows", failing)
    first = run(study, tmp_path / "o1")
    assert (first.tables["nights"].participant == "Q01").any()
    calls.clear()
    run(study, tmp_path / "o2")
    assert calls == ["Q01"]
