"""The interface's study loader: unchanged participants come from the batch cache, detail is re-scored on demand."""

from __future__ import annotations

import pandas as pd

from tui_helpers import copy_study

from sleepfuse.run.session import StudyLoader


def _load(root, **kw):
    loader = StudyLoader(root, **kw)
    loader.score(loader.participants)
    return loader, loader.finish()


def test_reopening_uses_the_cache_and_keeps_every_number(tmp_path):
    root = copy_study(tmp_path / "study")
    first, ws1 = _load(root)
    assert first.from_cache == set()
    second, ws2 = _load(root)
    assert second.from_cache == set(first.participants)  # nothing rescored
    pd.testing.assert_frame_equal(ws1.base_nights, ws2.base_nights)
    # a night opened after a cached load is re-scored from the files
    detail = ws2.detail("P01")
    assert "2026-10-31" in detail.hypnograms and detail.actigraphy


def test_changed_file_rescored_and_no_cache_option(tmp_path):
    root = copy_study(tmp_path / "study")
    _load(root)
    diary = root / "diary" / "P02_diary.csv"
    diary.write_text(diary.read_text().replace(",4,", ",5,", 1))
    again, _ = _load(root)
    assert again.from_cache == set(again.participants) - {"P02"}
    fresh, _ = _load(root, use_cache=False)
    assert fresh.from_cache == set()


def test_session_runs_participants_through_the_engine_and_builds_batch_s_night_table(tmp_path, monkeypatch):
    # One orchestration: the app's loader runs each participant with engine.run_participant (through
    # run.cache.run_cached, as batch does), and its night table equals batch's nights table.
    import sleepfuse.run.engine as engine
    from sleepfuse.fusion.epoch_table import epoch_table
    from sleepfuse.run.batch import BatchOptions, run_batch

    root = copy_study(tmp_path / "study")
    seen = []
    real = engine.run_participant
    monkeypatch.setattr(engine, "run_participant",
                        lambda config, job, inputs=None, **kw: seen.append(job.participant) or real(config, job, inputs, **kw))
    loader, ws = _load(root)
    assert seen == loader.participants and loader.from_cache == set()
    batch = run_batch(root, BatchOptions(out=tmp_path / "out"), argv=["test"])
    assert batch.n_from_cache == len(loader.participants)  # the app stored them where batch looks
    pd.testing.assert_frame_equal(ws.nights, batch.tables["nights"], check_exact=True)
    pd.testing.assert_frame_equal(epoch_table(ws.epoch_rows), batch.tables["epochs_agreement"], check_exact=True)
