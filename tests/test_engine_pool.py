"""The process pool runs participants a few to a task; a failure still costs only the participants it hits.

Common practice (no published source): one bad participant never stops a batch
(DESIGN.md), whether its reader raises or its worker process dies.
"""

from __future__ import annotations

import multiprocessing
import os

import pandas as pd
import pytest

import sleepfuse.run.engine as engine
from sleepfuse.model.config import load_config
from sleepfuse.model.qc import QCLog
from sleepfuse.run.participant import plan_jobs

from conftest import copy_demo_participants

PIDS = ("P01", "P02", "P03", "P04", "P05", "P06")

pytestmark = pytest.mark.skipif(multiprocessing.get_start_method() != "fork",
                                reason="the workers see this test's patches only when they are forked")


@pytest.fixture()
def jobs(tmp_path):
    config = load_config(copy_demo_participants(tmp_path / "study", PIDS))
    found, _ = plan_jobs(config, QCLog())
    return config, found


def _failed(outcome) -> bool:
    return any(e.severity == "error" and "participant not processed" in e.message for e in outcome.qc)


def test_chunks_give_the_outcomes_one_task_each_gives(jobs, monkeypatch):
    config, found = jobs
    single = engine.run_jobs(config, found, 1, None)
    monkeypatch.setattr(engine, "task_bounds", lambda n, workers: [(0, 4), (4, 6)])
    seen = []
    pooled = engine.run_jobs(config, found, 2, lambda pid, i, n: seen.append(i))
    assert [o.participant for o in pooled] == list(PIDS)
    for a, b in zip(pooled, single):  # NaN == NaN as values: compared as tables
        pd.testing.assert_frame_equal(pd.DataFrame(a.rows), pd.DataFrame(b.rows))
        pd.testing.assert_frame_equal(pd.DataFrame(a.epoch_rows), pd.DataFrame(b.epoch_rows))
    assert seen[-1] == len(PIDS) and sorted(set(seen)) == list(range(1, len(PIDS) + 1))


def test_a_participant_that_raises_loses_only_itself(jobs, monkeypatch):
    config, found = jobs
    real = engine.process_participant

    def flaky(cfg, job):
        if job.participant == "P02":
            raise RuntimeError("boom in P02")
        return real(cfg, job)

    monkeypatch.setattr(engine, "process_participant", flaky)
    monkeypatch.setattr(engine, "task_bounds", lambda n, workers: [(0, 3), (3, 6)])  # P02 shares its task with P01 and P03
    outcomes = {o.participant: o for o in engine.run_jobs(config, found, 2, None)}
    assert set(outcomes) == set(PIDS)
    assert _failed(outcomes["P02"]) and "boom in P02" in outcomes["P02"].qc[0].message
    assert outcomes["P02"].inputs, "a failed participant's files stay in the provenance"
    for pid in set(PIDS) - {"P02"}:
        assert not _failed(outcomes[pid]) and outcomes[pid].rows, pid


def test_a_worker_that_dies_costs_participants_not_the_batch(jobs, monkeypatch):
    config, found = jobs
    real = engine.process_participant

    def dies(cfg, job):
        if job.participant == "P05":
            os._exit(3)  # the worker process is gone (as after a crash in compiled code)
        return real(cfg, job)

    monkeypatch.setattr(engine, "process_participant", dies)
    monkeypatch.setattr(engine, "task_bounds", lambda n, workers: [(0, 2), (2, 4), (4, 6)])
    outcomes = {o.participant: o for o in engine.run_jobs(config, found, 2, None)}
    assert set(outcomes) == set(PIDS)  # every participant is accounted for
    assert _failed(outcomes["P05"]) and _failed(outcomes["P06"])  # P05's task: P05 and P06
    assert all(o.rows or _failed(o) for o in outcomes.values())


@pytest.mark.parametrize("n,workers", [(1, 2), (5, 2), (16, 2), (33, 2), (200, 2), (200, 8), (1000, 3)])
def test_task_bounds_cover_every_job_once_in_order(n, workers):
    bounds = engine.task_bounds(n, workers)
    assert [j for a, b in bounds for j in range(a, b)] == list(range(n))
    assert all(1 <= b - a <= 4 for a, b in bounds)
    if n >= 16 * workers:  # tasks of several participants, the last ones single
        assert max(b - a for a, b in bounds) > 1 and all(b - a == 1 for a, b in bounds[-2 * workers:])
