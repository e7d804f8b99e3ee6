"""Tests for sleepfuse.run.distributed: batch on a Dask cluster gives the single-process outputs.

A LocalCluster of 2 single-threaded worker processes scores a small invented
study (sleepfuse.synthetic.cohort, seeded); every output table must equal
that of the serial run, value for value (common practice: the scheduler must
not change results). Skipped when Dask is not installed (pip install
'sleepfuse[cluster]'); CI installs it.
"""

from __future__ import annotations

import datetime as dt
import sys

import pandas as pd
import pytest

from sleepfuse.run.batch import OUTPUT_TABLES, BatchOptions, run_batch
from sleepfuse.synthetic.cohort import ParticipantPlan, simulate_participant

TZ = "America/Chicago"
IDS = ("D01", "D02", "D03", "D04")


@pytest.fixture(scope="module")
def study(tmp_path_factory):
    root = tmp_path_factory.mktemp("dask") / "study"
    root.mkdir()
    (root / "study.toml").write_text(f'[study]\ntimezone = "{TZ}"\n[actigraphy]\ncount_scale = 0.01\n')
    first = dt.date(2026, 10, 29)  # the autumn DST change (2026-11-01) falls inside the recordings
    for i, pid in enumerate(IDS):
        plan = ParticipantPlan(pid, first, 4, psg_nights=[first + dt.timedelta(days=1 + i % 2)],
                               actigraphy_epoch_s=30 if i % 2 else 60)
        simulate_participant(root, plan, TZ, seed=900 + i)
    (root / "actigraphy" / "D05_wrist.csv").write_text("not,a,recording\n")  # one bad file: a QC error, not a crash
    return root


def test_local_cluster_outputs_equal_the_single_process_run(study, tmp_path):
    pytest.importorskip("distributed")
    serial = run_batch(study, BatchOptions(out=tmp_path / "serial", cache=False), argv=["test"])
    on_dask = run_batch(study, BatchOptions(out=tmp_path / "dask", cache=False, workers=2, scheduler="local"),
                        argv=["test"])
    assert on_dask.n_participants == serial.n_participants == len(IDS) + 1
    for name in OUTPUT_TABLES:
        pd.testing.assert_frame_equal(serial.tables[name], on_dask.tables[name], check_exact=True, obj=name)
        assert (tmp_path / "serial" / f"{name}.csv").read_bytes() == (tmp_path / "dask" / f"{name}.csv").read_bytes()
    assert on_dask.provenance["options"]["scheduler"] == "local"
    qc = on_dask.tables["qc"]
    assert ((qc.participant == "D05") & (qc.severity == "error")).any()


def test_missing_dask_gives_the_install_hint(study, tmp_path, monkeypatch):
    from sleepfuse.run.distributed import DaskUnavailable

    monkeypatch.setitem(sys.modules, "distributed", None)  # import distributed now raises ImportError
    with pytest.raises(DaskUnavailable, match=r"sleepfuse\[cluster\]"):
        run_batch(study, BatchOptions(out=tmp_path / "o", cache=False, scheduler="local"), argv=["test"])
    assert not (tmp_path / "o").exists()  # nothing half-written


def test_cli_reports_missing_dask_and_exits_2(study, tmp_path, monkeypatch, capsys):
    from sleepfuse.cli.main import main

    monkeypatch.setitem(sys.modules, "distributed", None)
    assert main(["batch", str(study), "--out", str(tmp_path / "o"), "--no-cache", "--scheduler", "local"]) == 2
    assert "pip install 'sleepfuse[cluster]'" in capsys.readouterr().err


def test_unreachable_scheduler_is_a_clear_error(study, tmp_path, monkeypatch):
    pytest.importorskip("distributed")
    import sleepfuse.run.distributed as d

    monkeypatch.setattr(d, "CONNECT_TIMEOUT", "2s")
    with pytest.raises(d.DaskUnavailable, match="cannot reach the Dask scheduler"):
        run_batch(study, BatchOptions(out=tmp_path / "o", cache=False, scheduler="tcp://127.0.0.1:9"), argv=["test"])
