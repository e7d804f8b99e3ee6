"""Hypnograms saved as text, and BDF+ (24-bit) hypnograms (issue 14). Invented nights only.

Label map: the EDF+ reader's (AASM W/N1/N2/N3/R; R&K numeric 0-5 as in EDF hypnogram signals).
Lights rows set the sleep opportunity as the EDF+ lights annotations do (AASM: lights off to on).
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pytest

from edf_builders import write_edf_plus
from sleepfuse.model.errors import ReadError
from sleepfuse.model.stages import Stage
from sleepfuse.readers.edf import read_hypnogram
from sleepfuse.readers.hypnogram_text import read_text_hypnogram

TZ = "Europe/Berlin"
START = dt.datetime(2026, 5, 14, 23, 0, 0)
LABELS = ["W", "N1", "N2", "N3", "R", "?", "Wake", "REM", "2"]
CODES = [Stage.WAKE, Stage.N1, Stage.N2, Stage.N3, Stage.REM, Stage.UNSCORED, Stage.WAKE, Stage.REM, Stage.N2]


def times(n):
    return [START + dt.timedelta(seconds=30 * i) for i in range(n)]


def test_date_time_rows_tab_separated(tmp_path):
    path = tmp_path / "P01_night1.tsv"
    path.write_text("Time\tSleep stage\n" + "".join(f"{t:%d/%m/%Y %H:%M:%S}\t{s}\n" for t, s in zip(times(9), LABELS)))
    h = read_text_hypnogram(path, TZ)
    assert h.stages.tolist() == [int(c) for c in CODES]
    assert h.start.isoformat() == "2026-05-14T23:00:00+02:00" and h.epoch_s == 30
    assert h.lights_off is None and h.lights_on is None  # scoring then uses first to last scored epoch, with a QC note


def test_epoch_numbers_with_the_start_on_a_header_line_and_numeric_rk_codes(tmp_path):
    path = tmp_path / "P01_night1.txt"
    codes = ["0", "1", "2", "3", "4", "5", "0"]
    path.write_text("Recording start: 2026-05-14 23:00:00\n\nEpoch;Stage\n" + "".join(f"{i + 1};{c}\n" for i, c in enumerate(codes)))
    h = read_text_hypnogram(path, TZ)
    assert h.stages.tolist() == [0, 1, 2, 3, 3, 4, 0]  # R&K: 4 folds into N3, 5 is REM
    assert h.start.isoformat() == "2026-05-14T23:00:00+02:00"


def test_lights_rows_set_the_opportunity_and_gaps_are_unscored(tmp_path):
    t = times(6)
    rows = [f"{t[0]:%Y-%m-%dT%H:%M:%S},Lights off", f"{t[0]:%Y-%m-%dT%H:%M:%S},W", f"{t[1]:%Y-%m-%dT%H:%M:%S},N1",
            f"{t[3]:%Y-%m-%dT%H:%M:%S},N2", f"{t[4]:%Y-%m-%dT%H:%M:%S},N2", f"{t[5]:%Y-%m-%dT%H:%M:%S},Lights on"]
    path = tmp_path / "P01_night1.csv"
    path.write_text("timestamp,stage\n" + "\n".join(rows) + "\n")
    h = read_text_hypnogram(path, TZ)
    assert h.stages.tolist() == [0, 1, -1, 2, 2]
    assert h.lights_off.isoformat() == "2026-05-14T23:00:00+02:00"
    assert h.lights_on.isoformat() == "2026-05-14T23:02:30+02:00"


def test_times_of_day_with_the_date_on_a_header_line_roll_over_midnight(tmp_path):
    t = [dt.datetime(2026, 5, 14, 23, 59, 0) + dt.timedelta(seconds=30 * i) for i in range(4)]
    path = tmp_path / "P01_night1.csv"
    path.write_text("Recording date: 14.05.2026\nEpoch,Time,Stage\n"
                    + "".join(f"{i + 1},{x:%H:%M:%S},{s}\n" for i, (x, s) in enumerate(zip(t, ["W", "N1", "N2", "N2"]))))
    h = read_text_hypnogram(path, TZ)
    assert h.stages.tolist() == [0, 1, 2, 2]
    assert h.start.isoformat() == "2026-05-14T23:59:00+02:00" and h.end.isoformat() == "2026-05-15T00:01:00+02:00"


def test_an_annotation_list_with_onsets_durations_and_events_reads_like_edf_plus(tmp_path):
    # onset (ISO), duration (s), description: stages spanning several epochs, events ignored, lights markers
    annotations = [(0, None, "Lights off"), (0, 60, "Sleep stage W"), (60, 30, "Sleep stage N1"),
                   (75, 10, "Arousal"), (90, 90, "Sleep stage N2"), (180, 30, "Sleep stage R"), (210, None, "Lights on")]
    edf = read_hypnogram(write_edf_plus(tmp_path / "P01_a.edf", start=START, annotations=annotations,
                                        record_duration_s=30), TZ)
    lines = ["onset,duration,description"] + [
        f"{(START + dt.timedelta(seconds=o)).isoformat()},{'' if d is None else d},{t}" for o, d, t in annotations]
    path = tmp_path / "P01_a.csv"
    path.write_text("\n".join(lines) + "\n")
    h = read_text_hypnogram(path, TZ)
    assert h.stages.tolist() == edf.stages.tolist() == [0, 0, 1, 2, 2, 2, 4]
    assert (h.start, h.lights_off, h.lights_on) == (edf.start, edf.lights_off, edf.lights_on)


def test_onsets_in_seconds_from_a_start_on_a_header_line(tmp_path):
    path = tmp_path / "P01_a.txt"
    path.write_text("Start: 2026-05-14 23:00:00\nOnset\tDuration\tStage\n0\t60\tW\n60\t30\tN1\n90\t30\tN2\n")
    h = read_text_hypnogram(path, TZ)
    assert h.stages.tolist() == [0, 0, 1, 2] and h.start.isoformat() == "2026-05-14T23:00:00+02:00"


def test_lights_in_an_event_column(tmp_path):
    t = times(4)
    rows = [f"{t[0]:%Y-%m-%d %H:%M:%S};Lights off;", f"{t[0]:%Y-%m-%d %H:%M:%S};;W", f"{t[1]:%Y-%m-%d %H:%M:%S};;N1",
            f"{t[2]:%Y-%m-%d %H:%M:%S};;N2", f"{t[3]:%Y-%m-%d %H:%M:%S};Lights on;W"]
    path = tmp_path / "P01_night1.csv"
    path.write_text("Date/Time;Event;Sleep stage\n" + "\n".join(rows) + "\n")
    h = read_text_hypnogram(path, TZ)
    assert h.stages.tolist() == [0, 1, 2, 0]
    assert (h.lights_off.isoformat(), h.lights_on.isoformat()) == ("2026-05-14T23:00:00+02:00", "2026-05-14T23:01:30+02:00")


def test_unknown_labels_are_unscored_and_reported(tmp_path):
    path = tmp_path / "P01_night1.csv"
    path.write_text("timestamp,stage\n" + "".join(f"{t:%Y-%m-%dT%H:%M:%S},{s}\n" for t, s in zip(times(3), ["W", "Z9", "N2"])))
    h = read_text_hypnogram(path, TZ)
    assert h.stages.tolist() == [0, -1, 2] and h.unknown_labels == {"Z9": 1}
    assert any("unknown stage labels" in p.message for p in h.problems)


def test_no_stage_column_is_a_clear_error(tmp_path):
    path = tmp_path / "P01_night1.csv"
    path.write_text("timestamp,value\n2026-05-14T23:00:00,1\n")
    with pytest.raises(ReadError, match="stage"):
        read_text_hypnogram(path, TZ)


def to_bdf(edf: bytes) -> bytes:
    """An annotation-only EDF+ file as BDF+: 0xff 'BIOSEMI', 'BDF+C', 'BDF Annotations', 3 bytes per sample
    (BioSemi's BDF description; the TAL bytes are unchanged, the annotation block padded with NULs)."""
    ns = int(edf[252:256])
    assert ns == 1
    hb = 256 * (ns + 1)
    header = bytearray(edf[:hb])
    header[0:8] = b"\xffBIOSEMI"
    header[192:197] = b"BDF+C"
    header[256:272] = b"BDF Annotations".ljust(16)
    n = int(header[256 + 216:256 + 224])
    body = edf[hb:]
    return bytes(header) + b"".join(body[i:i + 2 * n] + b"\x00" * n for i in range(0, len(body), 2 * n))


def test_bdf_plus_hypnogram_reads_like_its_edf_plus_twin(tmp_path):
    annotations = [(0, None, "Lights off"), (0, 60, "Sleep stage W"), (60, 30, "Sleep stage N1"),
                   (90, 90, "Sleep stage N2"), (180, 30, "Sleep stage R"), (210, None, "Lights on")]
    edf = write_edf_plus(tmp_path / "P01_a.edf", start=START, annotations=annotations, record_duration_s=30)
    bdf = tmp_path / "P01_a.bdf"
    bdf.write_bytes(to_bdf(edf.read_bytes()))
    a, b = read_hypnogram(edf, TZ), read_hypnogram(bdf, TZ)
    assert b.stages.tolist() == a.stages.tolist() == [0, 0, 1, 2, 2, 2, 4]
    assert (b.start, b.lights_off, b.lights_on) == (a.start, a.lights_off, a.lights_on)


def test_bdf_24_bit_signal_samples_are_signed_little_endian():
    from sleepfuse.readers._edfheader import EdfHeader, SignalHeader
    from sleepfuse.readers._edfplus import physical_samples

    values = [0, 1, -1, 8388607, -8388608, 4]  # 24-bit two's complement extremes
    raw = b"".join(v.to_bytes(3, "little", signed=True) for v in values)
    sig = SignalHeader("Hypnogram", -8388608.0, 8388607.0, -8388608, 8388607, n_samples=6, offset=0)
    header = EdfHeader(START, "EDF", 512, 1, 30.0, 18, (sig,), (), sample_bytes=3)
    out = physical_samples(None, header, np.frombuffer(raw, dtype=np.uint8).reshape(1, 18), 0)
    np.testing.assert_allclose(out[0], values)
