"""Tests of sleepfuse.readers.edf: EDF/EDF+ hypnograms, checked against the EDF+
specification (Kemp & Olivan 2003), pyedflib and MNE.

All participants, nights and names here are invented.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import os
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pyedflib
import pyedflib.data
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from edf_builders import write_edf_plus, write_signal_hypnogram
from sleepfuse.model.errors import ConfigError, ReadError
from sleepfuse.readers import _edfplus
from sleepfuse.readers.edf import DEFAULT_SIGNAL_CODES, DEFAULT_STAGE_LABELS, read_hypnogram, stage_code
from sleepfuse.model.records import Hypnogram
from sleepfuse.model.stages import Stage

W, N1, N2, N3, R, U = 0, 1, 2, 3, 4, -1
START = dt.datetime(2026, 2, 10, 22, 45, 10)
PYEDFLIB_DATA = Path(pyedflib.__file__).parent / "tests" / "data"


def sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


# --- EDF+ built byte by byte from the specification --------------------------------------------


def test_spec_built_file_reads_stages_lights_and_subsecond_start(tmp_path):
    # Source: EDF+ spec (Kemp & Olivan 2003): header fields, TAL "+onset\x15duration\x14text\x14\x00",
    # sub-second start in the first time-keeping TAL; onsets are relative to the header start time.
    start = START.replace(microsecond=250_000)
    path = write_edf_plus(
        tmp_path / "P01_n1.edf",
        start=start,
        annotations=[
            (0.25, None, "Lights off"),
            (30.25, 3600.0, "Sleep stage W"),  # one annotation spanning 120 epochs
            (3630.25, 30.0, "Sleep stage N1"),
            (3660.25, 30.0, "Sleep stage\n2"),  # multi-line text
            (3670.0, 30.0, "Technician note:\nelectrode re-attached"),  # multi-line, not a stage
            (3690.25, 30.0, "Sleep stage N3"),
            (3720.25, 30.0, "Sleep stage R"),
            (3750.25, None, "Lights on"),
        ],
        signals=[("EEG C4-M1", np.zeros(3800 * 4), 4)],
    )
    h = read_hypnogram(path, "Europe/Berlin")
    assert isinstance(h, Hypnogram)
    berlin = lambda s: pd.Timestamp(s, tz="Europe/Berlin")  # noqa: E731
    assert h.record_start == berlin("2026-02-10 22:45:10.250")
    assert h.start == berlin("2026-02-10 22:45:40.250")
    assert h.lights_off == berlin("2026-02-10 22:45:10.250")
    assert h.lights_on == berlin("2026-02-10 23:47:40.250")
    assert h.stages.dtype == np.int8
    assert h.stages.tolist() == [W] * 120 + [N1, N2, N3, R]
    assert h.unknown_labels == {} and h.problems == []


def test_annotation_only_edf_plus_c_reads(tmp_path):
    # Requirement: a file holding only the annotation signal reads (EDF+ spec allows ns = 1).
    path = write_edf_plus(
        tmp_path / "P02_n1.edf",
        start=START,
        annotations=[(60, 30, "W"), (90, 60, "N2"), (150, 30, "R")],
        record_duration_s=30,
    )
    h = read_hypnogram(path, "UTC")
    assert h.start == pd.Timestamp("2026-02-10 22:46:10", tz="UTC")
    assert h.stages.tolist() == [W, N2, N2, R]


def test_edf_plus_d_with_gaps(tmp_path):
    # Source: EDF+ spec, EDF+D: every data record's time-keeping TAL gives its onset; gaps are allowed.
    path = write_edf_plus(
        tmp_path / "P03_n1.edf",
        start=START,
        annotations=[(0, 30, "Sleep stage W"), (30, 30, "Sleep stage 1"), (120, 30, "Sleep stage 2")],
        edf_type="D",
        record_duration_s=30,
        record_onsets_s=[0, 30, 120],
    )
    h = read_hypnogram(path, "UTC")
    assert h.stages.tolist() == [W, N1, U, U, N2]
    # the gap (records end at 60 s, the next starts at 120 s) is reported with its length and time
    notes = [p for p in h.problems if "EDF+D recording interrupted" in p.message]
    assert len(notes) == 1 and notes[0].severity == "warning"
    assert "1 time(s), 1.0 min in all (longest 1.0 min from" in notes[0].message
    assert notes[0].time == pd.Timestamp(START, tz="UTC") + pd.Timedelta(seconds=60)


def test_edf_plus_d_without_gaps_has_no_gap_note(tmp_path):
    path = write_edf_plus(tmp_path / "P05_n1.edf", start=START, annotations=[(0, 30, "Sleep stage W"), (30, 30, "Sleep stage 1")],
                          edf_type="D", record_duration_s=30, record_onsets_s=[0, 30])
    assert not any("interrupted" in p.message for p in read_hypnogram(path, "UTC").problems)


def test_edf_plus_d_signal_hypnogram_places_records_by_onset(tmp_path):
    # Source: EDF+ spec (EDF+D time-keeping TALs); one sample per 30-s record.
    path = write_edf_plus(
        tmp_path / "P04_n1.edf",
        start=START,
        signals=[("Hypnogram", np.array([0, 1, 2]), 1 / 30)],
        edf_type="D",
        record_duration_s=30,
        record_onsets_s=[0, 30, 90],
    )
    h = read_hypnogram(path, "UTC")
    assert h.stages.tolist() == [W, N1, U, N2]
    assert any("without samples" in p.message for p in h.problems)


def test_parse_tals_spec_examples():
    # Source: EDF+ spec (Kemp & Olivan 2003) TAL examples, from memory: several annotations in one TAL,
    # a duration after \x15, and the time-keeping TAL with an empty first annotation.
    block = b"+0\x14\x14Recording starts\x14\x00+180\x14Lights off\x14Close door\x14\x00" \
            b"+1800.2\x1525.5\x14Apnea\x14\x00\x00\x00"
    tals, bad = _edfplus.parse_tals(block)
    assert bad == 0
    assert tals == [(0.0, None, ["", "Recording starts"]), (180.0, None, ["Lights off", "Close door"]),
                    (1800.2, 25.5, ["Apnea"])]
    assert _edfplus.parse_tals(b"+12\x14no end")[1] == 1


def test_tal_like_bytes_in_an_ordinary_signal_are_not_annotations(tmp_path):
    # Pitfall seen with mne.read_annotations (scans all bytes): only the annotation signal holds TALs.
    fake = np.frombuffer(b"+5\x1560\x14R\x14\x00\x00" * 6, dtype="<i2").astype(np.int64)
    path = write_edf_plus(tmp_path / "f.edf", start=START, annotations=[(0, 60, "N2")],
                          signals=[("EEG", np.resize(fake, 60), 1)], record_duration_s=30)
    assert read_hypnogram(path, "UTC").stages.tolist() == [N2, N2]
    import mne

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        assert "R" in mne.read_annotations(path).description  # the trap is real in this file


@pytest.mark.parametrize(
    "start, recording, year",
    [
        # Source: EDF+ spec: yy 85-99 -> 19yy, 00-84 -> 20yy; the recording field's
        # "Startdate dd-MMM-yyyy" gives the 4-digit year (needed after 2084).
        (dt.datetime(1990, 5, 1, 23, 0, 0), "X", 1990),
        (dt.datetime(2084, 5, 1, 23, 0, 0), "X", 2084),
        (dt.datetime(2090, 5, 1, 23, 0, 0), None, 2090),
    ],
)
def test_header_year_rule(tmp_path, start, recording, year):
    path = write_edf_plus(tmp_path / "y.edf", start=start, annotations=[(0, 30, "W")], recording=recording)
    assert read_hypnogram(path, "UTC").start.year == year


def test_overlap_later_annotation_wins_with_problem(tmp_path):
    # Rule of this reader (common practice): later onset wins on overlap, with a Problem.
    path = write_edf_plus(
        tmp_path / "o.edf", start=START, annotations=[(0, 90, "N2"), (30, 30, "R")], record_duration_s=30
    )
    h = read_hypnogram(path, "UTC")
    assert h.stages.tolist() == [N2, R, N2]
    assert any(p.severity == "warning" and "disagree" in p.message for p in h.problems)


def test_off_grid_onset_rounds_to_nearest_epoch(tmp_path):
    path = write_edf_plus(
        tmp_path / "g.edf", start=START, annotations=[(0, 30, "W"), (71, 30, "N1")], record_duration_s=30
    )
    h = read_hypnogram(path, "UTC")
    assert h.stages.tolist() == [W, U, N1]
    assert any("epoch grid" in p.message for p in h.problems)


@pytest.mark.parametrize("text", ["lights off", "LIGHTS OUT", "Lights Off ", "LightsOff", "lights_off"])
def test_lights_off_spellings(tmp_path, text):
    # SLEEP_PARAMETERS.md: case-insensitive "lights off" / "lights out" / "lights on".
    path = write_edf_plus(
        tmp_path / "l.edf",
        start=START,
        annotations=[(5, None, text), (30, 30, "W"), (60, None, " lights ON")],
        record_duration_s=30,
    )
    h = read_hypnogram(path, "UTC")
    assert h.lights_off == pd.Timestamp(START, tz="UTC") + pd.Timedelta(seconds=5)
    assert h.lights_on == pd.Timestamp(START, tz="UTC") + pd.Timedelta(seconds=60)


# --- labels ------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    "label, code",
    [
        # AASM scoring manual stage names.
        ("W", W), ("N1", N1), ("N2", N2), ("N3", N3), ("R", R), ("Sleep stage R", R), ("Sleep stage N2", N2),
        # Rechtschaffen & Kales 1968 (SLEEP_PARAMETERS.md mapping): S3 and S4 -> N3; MT -> unscored.
        ("S1", N1), ("S2", N2), ("S3", N3), ("S4", N3), ("Sleep stage 4", N3), ("Stage 2 sleep", N2),
        ("stage 3", N3), ("Movement time", U), ("Sleep stage M", U), ("Sleep stage ?", U), ("?", U),
        # Common spellings (common practice).
        ("NREM1", N1), ("NREM 2", N2), ("REM", R), ("Wake", W), ("Awake", W), ("1", N1), ("4", N3),
        ("sleep_stage-w", W), ("  SLEEP   STAGE   1 ", N1), ("unscored", U),
    ],
)
def test_default_label_map(label, code):
    assert stage_code(label) == code


def test_stage_code_unknown_and_extra():
    assert stage_code("Sleep stage 5") is None
    assert stage_code("5", {"5": "R"}) == R
    assert stage_code("4", {"4": "unscored"}) == U  # study.toml overrides the default
    assert set(DEFAULT_STAGE_LABELS.values()) == {"W", "N1", "N2", "N3", "R", "unscored"}


def test_rk_labels_fold_and_unknown_label_is_counted(tmp_path):
    # R&K 1968 -> AASM folding as SLEEP_PARAMETERS.md states; an unknown label is counted, never dropped.
    path = write_edf_plus(
        tmp_path / "rk.edf",
        start=START,
        annotations=[
            (0, 30, "Sleep stage W"),
            (30, 30, "Sleep stage 3"),
            (60, 30, "Sleep stage 4"),
            (90, 30, "Movement time"),
            (120, 60, "Sleep stage 5"),  # unknown, announced as a stage
            (180, 30, "Epoch score 7"),  # unknown, a whole-epoch duration
            (210, 30, "Obstructive apnea"),  # an event, ignored
            (215, 12.5, "Arousal"),  # an event, ignored
        ],
        record_duration_s=30,
    )
    h = read_hypnogram(path, "UTC")
    assert h.stages.tolist() == [W, N3, N3, U, U, U, U]
    assert h.unknown_labels == {"Sleep stage 5": 2, "Epoch score 7": 1}
    assert any("Sleep stage 5" in p.message and p.severity == "warning" for p in h.problems)
    mapped = read_hypnogram(path, "UTC", labels={"Sleep stage 5": "R"})
    assert mapped.stages.tolist() == [W, N3, N3, U, R, R, U]
    assert mapped.unknown_labels == {"Epoch score 7": 1}


def test_unknown_whole_epoch_annotation_yields_to_known_stage(tmp_path):
    path = write_edf_plus(
        tmp_path / "y.edf", start=START, annotations=[(0, 60, "N2"), (0, 30, "Position change 3")], record_duration_s=30
    )
    h = read_hypnogram(path, "UTC")
    assert h.stages.tolist() == [N2, N2]


# --- hypnogram stored as an ordinary integer signal ----------------------------------------------

CODES = [0, 0, 1, 2, 2, 3, 4, 5, 5, 6, 9, 2]
EXPECTED = [W, W, N1, N2, N2, N3, N3, R, R, U, U, N2]  # DEFAULT_SIGNAL_CODES (common practice)


@pytest.mark.parametrize("samples_per_epoch", [1, 30])  # one sample per epoch, and 1 Hz
def test_signal_hypnogram_default_codes(tmp_path, samples_per_epoch):
    path = write_signal_hypnogram(
        tmp_path / "s.edf", start=START, codes=CODES, samples_per_epoch=samples_per_epoch,
        extra_signals=[("EEG", np.zeros(len(CODES) * 30 * 2), 2)],
    )
    h = read_hypnogram(path, "UTC")
    assert h.stages.tolist() == EXPECTED
    assert h.start == h.record_start == pd.Timestamp(START, tz="UTC")
    assert DEFAULT_SIGNAL_CODES[4] == "N3" and DEFAULT_SIGNAL_CODES[9] == "unscored"


def test_signal_hypnogram_majority_per_epoch(tmp_path):
    samples = np.array([2] * 20 + [0] * 10 + [3] * 14 + [4] * 16)  # 1 Hz, two epochs
    path = write_edf_plus(tmp_path / "m.edf", start=START, signals=[("hypnogram", samples, 1.0)], record_duration_s=30)
    h = read_hypnogram(path, "UTC")
    assert h.stages.tolist() == [N2, N3]  # code 4 folds into N3 too
    assert any("more than one code" in p.message for p in h.problems)


def test_signal_hypnogram_extended_map_and_named_signal(tmp_path):
    path = write_signal_hypnogram(tmp_path / "x.edf", start=START, codes=[0, 7, 5, 8], label="Stages")
    with pytest.raises(ReadError, match="no sleep stages"):  # no "hypno" in the label
        read_hypnogram(path, "UTC")
    h = read_hypnogram(path, "UTC", signal_label="stages")
    assert h.stages.tolist() == [W, U, R, U]
    assert h.unknown_labels == {"code 7": 1, "code 8": 1}
    h = read_hypnogram(path, "UTC", signal_label="Stages", signal_codes={"7": "N2", "5": "N1"})
    assert h.stages.tolist() == [W, N2, N1, U]
    with pytest.raises(ReadError, match="no signal labelled"):
        read_hypnogram(path, "UTC", signal_label="Hypno2")


def test_signal_hypnogram_uses_physical_values(tmp_path):
    # EDF spec (Kemp et al. 1992): physical = pmin + (digital - dmin)(pmax - pmin)/(dmax - dmin).
    path = write_signal_hypnogram(
        tmp_path / "p.edf", start=START, codes=[0, 1, 2, 3, 5], physical=(0.0, 10.0), digital=(-2000, 2000)
    )
    with open(path, "rb") as fh:
        raw = fh.read()
    digital = np.frombuffer(raw[768 : 768 + 10], dtype="<i2")  # header 3 × 256 bytes; 5 records, signal first
    assert digital[0] == -2000  # so digital codes differ from the stage codes
    assert read_hypnogram(path, "UTC").stages.tolist() == [W, N1, N2, N3, R]


# --- agreement with pyedflib and MNE ------------------------------------------------------------


@pytest.mark.parametrize("name", ["test_generator.edf", "test_subsecond.edf", "test_utf8.edf"])
def test_parser_agrees_with_pyedflib_on_its_bundled_files(name):
    # Source: pyedflib's bundled test files and EdfReader.readAnnotations(); pyedflib gives onsets
    # relative to the first data record (header start + sub-second offset).
    path = PYEDFLIB_DATA / name if name != "test_generator.edf" else Path(pyedflib.data.get_generator_filename())
    raw = path.read_bytes()
    header = _edfplus.read_header(path, raw[: 256 * 64], len(raw))
    ann = _edfplus.read_annotations(path, header, _edfplus.data_records(path, header))
    with pyedflib.EdfReader(str(path)) as reader:
        onsets, durations, texts = reader.readAnnotations()
        subsecond = reader.starttime_subsecond * 1e-7  # 100-ns units
    ours = ann.annotations
    assert [a.text for a in ours] == list(texts)
    np.testing.assert_allclose([a.onset_s - ann.record_onsets_s[0] for a in ours], onsets, atol=2e-7)
    assert [a.duration_s if a.duration_s is not None else -1.0 for a in ours] == list(durations)
    assert ann.record_onsets_s[0] == pytest.approx(subsecond, abs=1e-7)


def test_reader_on_pyedflib_subsecond_file():
    # Source: pyedflib test_subsecond.edf; starttime_subsecond is the start offset in 100-ns units.
    path = PYEDFLIB_DATA / "test_subsecond.edf"
    h = read_hypnogram(path, "UTC", labels={"XLSpike": "W"})
    with pyedflib.EdfReader(str(path)) as reader:
        whole = dt.datetime(reader.startdate_year, reader.startdate_month, reader.startdate_day,
                            reader.starttime_hour, reader.starttime_minute, reader.starttime_second)
        expected = pd.Timestamp(whole, tz="UTC") + pd.Timedelta(reader.starttime_subsecond * 100, unit="ns")
    assert h.record_start == expected
    assert h.stages[0] == W and h.stages[-1] == W and (h.stages[1:-1] == U).all()


def test_stage_runs_agree_with_mne_on_pyedflib_written_file(tmp_path):
    # Source: files written by pyedflib.EdfWriter.writeAnnotation, read back by mne.read_annotations
    # (with an ordinary signal present, as MNE needs).
    import mne

    path = tmp_path / "P05_n1.edf"
    stages = [("Sleep stage W", 90), ("Sleep stage 1", 30), ("Sleep stage 2", 300), ("Sleep stage 3", 600),
              ("Sleep stage R", 150), ("Sleep stage W", 60), ("Sleep stage 2", 120)]
    with pyedflib.EdfWriter(str(path), 1, file_type=pyedflib.FILETYPE_EDFPLUS) as writer:
        writer.setSignalHeaders([{"label": "EEG Fpz-Cz", "dimension": "uV", "sample_frequency": 10,
                                  "physical_max": 100, "physical_min": -100,
                                  "digital_max": 32767, "digital_min": -32768}])
        writer.setStartdatetime(dt.datetime(2026, 3, 7, 23, 1, 2))
        writer.writeAnnotation(5, -1, "Lights off")
        onset = 35
        for label, duration in stages:
            writer.writeAnnotation(onset, duration, label)
            onset += duration
        rng = np.random.default_rng(5)
        for _ in range(1400):
            writer.writePhysicalSamples(rng.normal(0, 10, 10))
    h = read_hypnogram(path, "Europe/Berlin")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        mne_ann = mne.read_annotations(path)
    wanted = [stage_code(d) is not None for d in mne_ann.description]
    mne_onset = mne_ann.onset[wanted]
    mne_duration = mne_ann.duration[wanted]
    mne_codes = [stage_code(d) for d in mne_ann.description[wanted]]
    # Runs of equal stages in our hypnogram, as (onset s after record start, duration s, code).
    change = np.flatnonzero(np.diff(h.stages.astype(int))) + 1
    bounds = np.concatenate([[0], change, [h.n_epochs]])
    offset = (h.start - h.record_start).total_seconds()
    runs_onset = offset + bounds[:-1] * h.epoch_s
    np.testing.assert_allclose(runs_onset, mne_onset)
    np.testing.assert_allclose(np.diff(bounds) * h.epoch_s, mne_duration)
    assert h.stages[bounds[:-1]].tolist() == mne_codes
    assert h.lights_off == h.record_start + pd.Timedelta(seconds=float(mne_ann.onset[0]))


# --- bad input, source files untouched ------------------------------------------------------------


def _good_file(tmp_path: Path) -> Path:
    return write_edf_plus(
        tmp_path / "good.edf", start=START, annotations=[(0, 60, "N2"), (60, 30, "R")],
        signals=[("EEG", np.zeros(90), 1)],
    )


def test_truncated_and_garbage_files_raise_read_error_and_stay_unchanged(tmp_path):
    good = _good_file(tmp_path)
    truncated = tmp_path / "trunc.edf"
    truncated.write_bytes(good.read_bytes()[:-50])
    garbage = tmp_path / "garbage.edf"
    garbage.write_bytes(bytes(range(256)) * 8)
    text = tmp_path / "notes.edf"
    text.write_text("participant P01 slept well\n")
    before = {p: sha256(p) for p in (good, truncated, garbage, text)}
    read_hypnogram(good, "UTC")
    with pytest.raises(ReadError, match=r"truncated: expected \d+ bytes.*found \d+") as info:
        read_hypnogram(truncated, "UTC")
    assert info.value.path == truncated and str(truncated) in str(info.value)
    for bad in (garbage, text, tmp_path / "missing.edf", tmp_path):
        with pytest.raises(ReadError) as info:
            read_hypnogram(bad, "UTC")
        assert info.value.path == bad
    assert {p: sha256(p) for p in before} == before


def test_bad_options_raise_config_error(tmp_path):
    good = _good_file(tmp_path)
    with pytest.raises(ConfigError, match="timezone"):
        read_hypnogram(good, "Mars/Olympus")
    with pytest.raises(ConfigError, match="psg.labels"):
        read_hypnogram(good, "UTC", labels={"Stage 5": "REM sleep"})
    with pytest.raises(ConfigError, match="signal_codes"):
        read_hypnogram(good, "UTC", signal_codes={"five": "R"})


def _outcome_is_hypnogram_or_read_error(path: Path) -> None:
    try:
        h = read_hypnogram(path, "UTC")
    except ReadError as exc:
        assert exc.path == path and exc.reason
        return
    assert isinstance(h, Hypnogram) and h.n_epochs >= 1
    assert h.stages.dtype == np.int8 and set(np.unique(h.stages)) <= {int(s) for s in Stage}


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(blob=st.one_of(st.binary(max_size=2048), st.binary(max_size=2048).map(lambda b: b"0       " + b)))
def test_arbitrary_bytes_give_hypnogram_or_read_error(tmp_path, blob):
    path = tmp_path / "fuzz.edf"
    path.write_bytes(blob)
    _outcome_is_hypnogram_or_read_error(path)


@settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(data=st.data())
def test_mutated_valid_file_gives_hypnogram_or_read_error(tmp_path, data):
    base = _good_file(tmp_path).read_bytes()
    blob = bytearray(base)
    flips = data.draw(st.lists(st.tuples(st.integers(0, len(base) - 1), st.integers(0, 255)), max_size=8))
    for pos, value in flips:
        blob[pos] = value
    cut = data.draw(st.one_of(st.none(), st.integers(0, len(base))))
    path = tmp_path / "mutant.edf"
    path.write_bytes(bytes(blob[:cut] if cut is not None else blob))
    _outcome_is_hypnogram_or_read_error(path)


# --- personal header fields never leave the reader --------------------------------------------------

NAME, BIRTH = "Quillfeather_Zorabeth", "17-OCT-1963"  # invented
PATIENT = f"XQZ-907316 F {BIRTH} {NAME}"
SECRETS = ("Quillfeather", "Zorabeth", BIRTH, "1963", "XQZ-907316")


def _strings_of(h: Hypnogram) -> list[str]:
    out = [repr(h), str(h.path)] + [repr(p) for p in h.problems] + list(h.unknown_labels)
    return out + [str(v) for v in vars(h).values()]


def test_patient_fields_never_reach_any_output(tmp_path):
    # Requirement (DESIGN.md): EDF patient name and birth date never reach an output.
    path = write_edf_plus(
        tmp_path / "P06_n1.edf", start=START, patient=PATIENT,
        annotations=[(0, 30, "W"), (30, 30, "Sleep stage Zorabeth"), (45, 30, "N2")], record_duration_s=15,
    )
    h = read_hypnogram(path, "UTC")
    assert h.unknown_labels and h.problems  # there is something to leak through
    texts = _strings_of(h)
    broken = []
    raw = path.read_bytes()
    for name, blob in [("trunc.edf", raw[:-7]), ("badns.edf", raw[:252] + b"ab  " + raw[256:]),
                       ("nostage.edf", None), ("baddate.edf", raw[:168] + b"31.02.26" + raw[176:])]:
        p = tmp_path / name
        if blob is None:
            write_edf_plus(p, start=START, patient=PATIENT, annotations=[(0, None, "Recording starts")])
        else:
            p.write_bytes(blob)
        with pytest.raises(ReadError) as info:
            read_hypnogram(p, "UTC")
        broken.append(str(info.value))
    for text in texts + broken:
        for secret in SECRETS:
            assert secret.lower() not in text.lower(), (secret, text)


# --- time zone -------------------------------------------------------------------------------------


def test_epochs_across_spring_forward_keep_elapsed_spacing(tmp_path):
    # Real IANA zone: America/Chicago springs forward on 2026-03-08 at 02:00 CST -> 03:00 CDT.
    path = write_edf_plus(
        tmp_path / "dst.edf", start=dt.datetime(2026, 3, 8, 1, 40, 0),
        annotations=[(0, None, "Lights off"), (0, 3600, "N2")], record_duration_s=30,
    )
    h = read_hypnogram(path, "America/Chicago")
    times = h.epoch_times()
    assert ((times[1:] - times[:-1]) == pd.Timedelta(seconds=30)).all()
    assert times[0] == pd.Timestamp("2026-03-08 01:40:00-06:00")
    assert str(times[40]) == "2026-03-08 03:00:00-05:00"  # 20 elapsed minutes later, after the jump
    assert (h.end - h.start) == pd.Timedelta(hours=1)
    assert h.lights_off.utcoffset() == dt.timedelta(hours=-6)


def test_source_files_are_opened_read_only(tmp_path):
    good = _good_file(tmp_path)
    os.chmod(good, 0o444)
    try:
        assert read_hypnogram(good, "UTC").stages.tolist() == [N2, N2, R]
    finally:
        os.chmod(good, 0o644)
