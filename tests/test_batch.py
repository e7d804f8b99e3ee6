"""End to end: a crafted study with known truth -> batch -> every output table.

The expected values follow by hand from the AASM definitions (SLEEP_PARAMETERS.md),
the Cole–Kripke 1992 formula and the diary arithmetic; each is worked out in a comment.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import json
import math

import numpy as np
import pandas as pd
import pytest

from sleepfuse.run.batch import OUTPUT_TABLES, BatchOptions, run_batch
from sleepfuse.fusion.agreement import AGREEMENT_COLUMNS
from sleepfuse.fusion.epoch_table import EPOCH_COLUMNS
from sleepfuse.fusion.matrix import CODEBOOK_COLUMNS
from sleepfuse.model.qc import QC_COLUMNS
from sleepfuse.scoring.nights import NIGHT_COLUMNS
from sleepfuse.synthetic.edf_writer import write_edf_plus

TZ = "Europe/Berlin"
NIGHT = dt.date(2026, 6, 10)
SOL = {"A1": 20, "A2": 30, "A3": 40}  # PSG sleep-onset latency, minutes
EXTRA_WAKE = {"A1": 0, "A2": 1, "A3": 2}  # isolated 1-min wake minutes only the actigraph sees
PATIENT = "X F 02-FEB-1981 Nobody_Testperson"


def hypnogram(sol: int) -> list[str]:
    """Per 30-s epoch from lights off 23:00 to lights on 07:00 (480 min)."""
    m = ["W"] * sol  # sleep-onset latency
    m += ["N1"] * 10 + ["N3"] * 40  # 23:00+sol ..
    m += ["N2"] * (180 - len(m))  # .. 02:00
    m += ["W"] * 30  # 02:00-02:30 wake bout
    m += ["N2"] * (405 - len(m))  # .. 05:45
    m += ["R"] * 60  # 05:45-06:45
    m += ["W"] * 15  # 06:45-07:00 terminal wake
    assert len(m) == 480
    return [s for s in m for _ in range(2)]  # minutes -> 30-s epochs


def write_study(root):
    root.mkdir(parents=True, exist_ok=True)
    (root / "study.toml").write_text(
        f'[study]\nname = "crafted"\ntimezone = "{TZ}"\n'
        "[actigraphy]\ncount_scale = 1.0\nwebster = false\nnonwear = \"none\"\n"
    )
    label = {"W": "Sleep stage W", "N1": "Sleep stage N1", "N2": "Sleep stage N2", "N3": "Sleep stage N3", "R": "Sleep stage R"}
    diary_lines = ["participant,night,bedtime,tried_to_sleep,sol_min,nwak,waso_min,final_awakening,out_of_bed,quality"]
    for k, (pid, sol) in enumerate(SOL.items()):
        epochs = hypnogram(sol)
        # the recording starts 10 min before lights off, scored wake
        anns = [(0.0, 600.0, "Sleep stage W"), (600.0, None, "Lights off"), (600.0 + 480 * 60, None, "Lights on")]
        anns += [(600.0 + 30 * i, 30.0, label[s]) for i, s in enumerate(epochs)]
        write_edf_plus(root / "psg" / f"{pid}_night1.edf", start=dt.datetime(2026, 6, 10, 22, 50),
                       annotations=anns, duration_s=600 + 480 * 60, patient=PATIENT)
        # actigraphy: 60-s epochs from noon to noon; 500 counts while awake, 0 asleep
        start = pd.Timestamp("2026-06-10 12:00")
        minutes = pd.date_range(start, periods=24 * 60, freq="min")
        rel = (minutes - pd.Timestamp("2026-06-10 23:00")) / pd.Timedelta(minutes=1)
        awake = (rel < sol) | ((rel >= 180) & (rel < 210)) | (rel >= 465)
        for j in range(EXTRA_WAKE[pid]):
            awake |= rel == 250 + 40 * j
        counts = np.where(awake, 500, 0)
        lines = ["timestamp,counts"] + [f"{t:%Y-%m-%dT%H:%M:%S},{c}" for t, c in zip(minutes, counts)]
        (root / "actigraphy").mkdir(exist_ok=True)
        (root / "actigraphy" / f"{pid}_wrist.csv").write_text("\n".join(lines) + "\n")
        diary_lines.append(f"{pid},{NIGHT},22:50,23:00,{sol + 5 * (k + 1)},1,30,06:45,07:00,{3 + k}")
    (root / "diary").mkdir(exist_ok=True)
    (root / "diary" / "diary.csv").write_text("\n".join(diary_lines) + "\n")
    return root


@pytest.fixture(scope="module")
def crafted(tmp_path_factory):
    root = write_study(tmp_path_factory.mktemp("crafted"))
    out = root.parent / (root.name + "_out")
    result = run_batch(root, BatchOptions(out=out), argv=["test"])
    return root, out, result


def test_every_output_has_documented_columns(crafted):
    _, out, result = crafted
    for name in OUTPUT_TABLES:
        assert (out / f"{name}.csv").exists()
    assert list(pd.read_csv(out / "nights.csv").columns) == NIGHT_COLUMNS
    assert list(pd.read_csv(out / "agreement.csv").columns) == ["parameter", "pair", "unit", *AGREEMENT_COLUMNS]
    assert list(pd.read_csv(out / "epochs_agreement.csv").columns) == EPOCH_COLUMNS
    assert list(pd.read_csv(out / "codebook.csv").columns) == CODEBOOK_COLUMNS
    assert list(pd.read_csv(out / "qc.csv").columns) == QC_COLUMNS
    matrix = pd.read_csv(out / "matrix.csv")
    assert list(matrix["participant"]) == ["A1", "A2", "A3"]
    assert set(pd.read_csv(out / "codebook.csv")["name"]) == set(matrix.columns)
    prov = json.loads((out / "provenance.json").read_text())
    assert prov["algorithm"]["coefficient_set"] == "1min-p0.001" and prov["algorithm"]["P"] == 0.001
    # the choices SLEEP_PARAMETERS.md leaves open are stated (issue 13)
    if prov["algorithm"]["webster_rescoring"]:
        assert prov["algorithm"]["webster_order"] == "sequential"
        assert "from memory" in prov["algorithm"]["webster_order_reading"]
    assert prov["algorithm"]["count_scale_key"] == "actigraphy.count_scale"
    assert "neither sleep nor wake" in prov["algorithm"]["missing_minutes"]
    assert "Carkeet 2015" in prov["agreement_methods"]["single_level"]
    assert "Bland & Altman 2007" in prov["agreement_methods"]["nested_nights"]
    assert prov["agreement_methods"]["bootstrap_replicates"] == 1000
    assert {"tib_min", "is_iv_missing_hours", "rhythm_units"} <= set(prov["definitions"])
    assert len(prov["inputs"]) == 7 and all(len(i["sha256"]) == 64 for i in prov["inputs"])
    # Readers checksum the bytes they read; every digest is the file's SHA-256 (hashlib, FIPS 180-4).
    root = crafted[0]
    for i in prov["inputs"]:
        assert i["sha256"] == hashlib.sha256((root / i["file"]).read_bytes()).hexdigest(), i["file"]
    assert not list(out.glob(".*.tmp"))  # atomic writes leave no temp files


def _row(out, pid, source):
    nights = pd.read_csv(out / "nights.csv")
    r = nights[(nights.participant == pid) & (nights.source == source)]
    assert len(r) == 1, r
    return r.iloc[0]


@pytest.mark.parametrize("pid", list(SOL))
def test_psg_parameters_by_hand(crafted, pid):
    _, out, _ = crafted
    s = SOL[pid]
    r = _row(out, pid, "psg")
    # AASM: TRT = lights off 23:00 to lights on 07:00 = 480 min; latency = s; REM latency = first
    # sleep (23:00+s) to first R (05:45) = 405 - s; WASO inside the sleep period = the 30-min bout
    assert r.tib_min == 480 and r.sol_min == s and r.rem_latency_min == 405 - s
    assert r.tst_min == 480 - s - 30 - 15 and r.waso_min == 30 and r.terminal_wake_min == 15
    assert r.spt_min == 465 - s and r.nwak == 1
    assert r.n1_min == 10 and r.n3_min == 40 and r.rem_min == 60 and r.n2_min == r.tst_min - 110
    assert r.se_pct == pytest.approx(100 * (435 - s) / 480)
    assert r.lps_min == s  # the first sleep run is far longer than 10 min
    assert r.window_rule == "lights off/on markers" and bool(r.included)


@pytest.mark.parametrize("pid", list(SOL))
def test_actigraphy_parameters_by_hand(crafted, pid):
    _, out, _ = crafted
    s, k = SOL[pid], EXTRA_WAKE[pid]
    r = _row(out, pid, "actigraphy")
    # Cole–Kripke 1992 (P = 0.001, weights 106,54,58,76,230,74,67 on A-4..A+2): with 500 counts a
    # wake minute makes D >= 0.001*54*500 = 27 for every minute whose window holds it, so a wake
    # block [a, b) is scored wake on [a-2, b+4). Window = diary 23:00-07:00 (480 min).
    assert r.window_rule == "diary tried to sleep to out of bed" and r.tib_min == 480
    assert r.sol_min == s + 4  # onset block ends at 23:00+s, scored wake 4 min longer
    assert r.terminal_wake_min == 15 + 2  # final block starts at 06:45, scored from 06:43
    # bout 02:00-02:30 -> 01:58-02:34 (36 min); each isolated wake minute -> 7 min
    assert r.waso_min == 36 + 7 * k and r.nwak == 1 + k
    assert r.tst_min == 480 - (s + 4) - 17 - 36 - 7 * k
    assert r.offwrist_min == 0


@pytest.mark.parametrize("k, pid", list(enumerate(SOL)))
def test_diary_parameters_by_hand(crafted, k, pid):
    _, out, _ = crafted
    s = SOL[pid] + 5 * (k + 1)
    r = _row(out, pid, "diary")
    # tst = (final - tried) - sol - waso = 465 - s - 30; spt = 465 - s; terminal = 15; in bed = 22:50-07:00
    assert r.tib_min == 480 and r.tst_min == 435 - s and r.spt_min == 465 - s
    assert r.terminal_wake_min == 15 and r.in_bed_min == 490 and r.quality == 3 + k


def test_agreement_by_hand(crafted):
    _, out, _ = crafted
    ag = pd.read_csv(out / "agreement.csv")
    tst = ag[(ag.parameter == "tst_min") & (ag.pair == "actigraphy-psg")].iloc[0]
    # differences actigraphy - PSG TST: -(4 + 2 + 6) - 7k = -12, -19, -26 -> bias -19, SD 7 (Bland & Altman 1986)
    assert tst.n_nights == 3 and tst.n_participants == 3
    assert tst.bias == pytest.approx(-19) and tst.sd == pytest.approx(7)
    assert tst.loa_low == pytest.approx(-19 - 1.959964 * 7, abs=1e-4)
    assert tst.loa_high == pytest.approx(-19 + 1.959964 * 7, abs=1e-4)
    # diary - PSG SOL: 5(k+1) -> 5, 10, 15: bias 10
    sol = ag[(ag.parameter == "sol_min") & (ag.pair == "diary-psg")].iloc[0]
    assert sol.bias == pytest.approx(10) and sol.sd == pytest.approx(5)
    # one night per participant: single-level methods, named in their columns
    assert sol.bias_ci_method == "t on n-1 df (Bland & Altman 1999)"
    assert sol.loa_ci_method == "exact, noncentral t (Carkeet 2015)" and sol.mn_loa_ci_method == sol.loa_ci_method
    assert not sol.by_construction and sol.n_inf_dropped == 0


def test_epoch_agreement_by_hand(crafted):
    _, out, _ = crafted
    ep = pd.read_csv(out / "epochs_agreement.csv")
    a1 = ep[ep.participant == "A1"].iloc[0]
    # A1 (s=20): PSG wake epochs in the window = 2*(20+30+15) = 130; actigraphy calls them all wake,
    # and also 2*(4+6+2) = 24 PSG sleep epochs wake: sensitivity = (2*415-24)/(2*415), specificity 1
    assert a1.n_epochs == 960
    assert a1.psg_wake_act_wake == 130 and a1.psg_wake_act_sleep == 0
    assert a1.psg_sleep_act_wake == 24 and a1.sensitivity == pytest.approx((830 - 24) / 830)
    assert a1.specificity == 1.0
    assert ep.iloc[-1].participant == "(pooled)"


def test_matrix_values(crafted):
    _, out, _ = crafted
    m = pd.read_csv(out / "matrix.csv").set_index("participant")
    assert m.loc["A2", "psg_tst_min_mean"] == 435 - 30
    assert math.isnan(m.loc["A2", "psg_tst_min_sd"])  # one night: SD undefined
    assert m.loc["A2", "psg_nights"] == 1 and m.loc["A2", "diary_nights"] == 1


def test_no_edf_patient_field_in_any_output(crafted):
    _, out, _ = crafted
    for path in out.rglob("*"):
        if path.is_file():
            text = path.read_bytes()
            assert b"Nobody_Testperson" not in text and b"02-FEB-1981" not in text, path


def test_review_decision_is_honoured_and_listed(tmp_path):
    from sleepfuse.study.review import record_decision

    root = write_study(tmp_path / "study")
    record_decision(root, "A2", NIGHT.isoformat(), "psg", "exclude", "electrode came off")
    result = run_batch(root, BatchOptions(out=tmp_path / "out"), argv=["test"])
    n = result.tables["nights"]
    row = n[(n.participant == "A2") & (n.source == "psg")].iloc[0]
    assert not row.included and "electrode came off" in row.qc
    assert result.provenance["review_decisions"]["decisions"][0]["reason"] == "electrode came off"
    ag = result.tables["agreement"]
    assert ag[(ag.parameter == "tst_min") & (ag.pair == "actigraphy-psg")].iloc[0].n_nights == 2


def test_parquet_and_workers_give_the_same_tables(tmp_path, crafted):
    root, out, _ = crafted
    run_batch(root, BatchOptions(out=tmp_path / "pq", format="parquet", workers=2), argv=["test"])
    for name in OUTPUT_TABLES:
        a = pd.read_csv(out / f"{name}.csv")
        b = pd.read_parquet(tmp_path / "pq" / f"{name}.parquet")
        assert list(a.columns) == list(b.columns)
        assert len(a) == len(b)
    # CSV reads empty text as missing; Parquet keeps "" — compare on that footing
    parquet = pd.read_parquet(tmp_path / "pq" / "nights.parquet").replace("", np.nan)
    pd.testing.assert_frame_equal(pd.read_csv(out / "nights.csv"), parquet, check_dtype=False)


def test_run_cut_short_leaves_no_provenance(tmp_path, crafted, monkeypatch):
    """provenance.json marks a complete run (common practice for atomic multi-file outputs)."""
    import sleepfuse.run.batch as batch

    root, _, _ = crafted
    out = tmp_path / "out"
    run_batch(root, BatchOptions(out=out), argv=["test"])
    assert (out / "provenance.json").exists()

    def broken(*args, **kwargs):
        raise KeyboardInterrupt  # the run is stopped while writing the tables

    monkeypatch.setattr(batch, "write_table", broken)
    with pytest.raises(KeyboardInterrupt):
        run_batch(root, BatchOptions(out=out), argv=["test"])
    assert not (out / "provenance.json").exists()
    assert not list(out.glob(".*.tmp"))


def test_allocator_tuning_is_applied_once_and_can_be_turned_off():
    # Common practice (glibc mallopt): the tuning is a process setting; run it in fresh interpreters.
    import os
    import subprocess
    import sys

    code = "from sleepfuse.run._alloc import tune_allocator as t; print(t(), t())"
    env = dict(os.environ, SLEEPFUSE_MALLOC_TUNING="0")
    off = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True, check=True)
    assert off.stdout.split() == ["False", "False"]
    on = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    first, second = on.stdout.split()
    assert first == second  # idempotent: the same answer on a second call
    if sys.platform.startswith("linux") and os.path.exists("/lib/x86_64-linux-gnu/libc.so.6"):
        assert first == "True"
