"""Diaries kept in spreadsheets and lab CSVs (issue 14): workbooks via pandas (openpyxl, odfpy),
one sheet or a named sheet, time/text/date cells, a participant column or one file per participant;
the trade's column names; day-first nights and 12-hour clocks. Invented nights only."""

from __future__ import annotations

import dataclasses
import datetime as dt

import pandas as pd
import pytest

from sleepfuse.model.errors import ReadError
from sleepfuse.readers._columns import match_columns, suggest
from sleepfuse.readers.diary import read_diary

TZ = "America/Chicago"
CSV = ("night,bedtime,tried_to_sleep,sol_min,nwak,waso_min,final_awakening,out_of_bed,quality\n"
       "2026-05-14,22:10,22:30,15,2,20,06:30,06:45,3\n"
       "2026-05-15,23:05,23:20,10,1,5,07:00,07:10,4\n")


def reference(tmp_path):
    path = tmp_path / "ref" / "P01_diary.csv"
    path.parent.mkdir()
    path.write_text(CSV)
    return read_diary(path, TZ, participant="P01").entries


def typed_frame():
    return pd.DataFrame({
        "Night": [dt.date(2026, 5, 14), dt.date(2026, 5, 15)],                      # date cells
        "Bedtime": [dt.time(22, 10), dt.time(23, 5)],                               # time cells
        "Tried to sleep": ["22:30", "23:20"],                                        # text cells
        "SOL": [15, 10], "Awakenings": [2, 1], "WASO": [20.0, 5.0],
        "Final awakening": [dt.time(6, 30), dt.time(7, 0)],
        "Out of bed": [dt.datetime(2026, 5, 15, 6, 45), dt.datetime(2026, 5, 16, 7, 10)],  # date-time cells
        "Sleep quality": [3, 4],
    })


@pytest.mark.parametrize("suffix,engine", [(".xlsx", "openpyxl"), (".ods", "odf")])
def test_workbook_one_file_per_participant(tmp_path, suffix, engine):
    path = tmp_path / f"P01_diary{suffix}"
    typed_frame().to_excel(path, index=False, engine=engine)
    diary = read_diary(path, TZ, participant="P01")
    assert diary.entries == reference(tmp_path)
    assert "workbook" in diary.detected["dialect"]


def test_workbook_named_sheet_with_a_participant_column_and_a_title_row(tmp_path):
    path = tmp_path / "diary.xlsx"
    frame = typed_frame()
    frame.insert(0, "Participant ID", ["P01", "P01"])
    with pd.ExcelWriter(path, engine="openpyxl") as xl:
        pd.DataFrame([["readme"]]).to_excel(xl, sheet_name="About", header=False, index=False)
        pd.DataFrame([["Diary of an invented study"]]).to_excel(xl, sheet_name="Entries", header=False, index=False)
        frame.to_excel(xl, sheet_name="Entries", index=False, startrow=2)
    auto = read_diary(path, TZ)  # the sheet with the diary's columns is found
    named = read_diary(path, TZ, sheet="Entries")
    assert auto.entries == named.entries
    assert [e.line for e in named.entries] == [4, 5]  # sheet rows: title, blank, header, then the nights
    assert [dataclasses.replace(e, line=0) for e in named.entries] == [
        dataclasses.replace(e, line=0) for e in reference(tmp_path)]
    with pytest.raises(ReadError, match="no sheet 'Diary'.*sheet"):
        read_diary(path, TZ, sheet="Diary")


def test_csv_with_trade_names_day_first_nights_and_12_hour_clock(tmp_path):
    path = tmp_path / "P01_diary.csv"
    path.write_text("Date;Bed time;Lights off;SOL;Awakenings;WASO;Final awakening;Out of bed;Sleep quality\r\n"
                    "14/05/2026;10:10 PM;10:30 PM;15;2;20;6:30 AM;6:45 AM;3\r\n"
                    "15/05/2026;11:05 PM;11:20 PM;10;1;5;7:00 AM;7:10 AM;4\r\n")
    diary = read_diary(path, TZ, participant="P01")
    assert diary.entries == reference(tmp_path)
    assert "day-first" in diary.detected["dates"]
    assert any(p.severity == "info" and "read as" in p.message for p in diary.problems)


def test_column_matching_is_one_function_with_synonyms_explicit_names_and_unknown_columns():
    header = ["Date/Time", "ACTIVITY COUNTS", "Non-wear", "Event marker", "Lux", "Temperature (C)"]
    roles = ("timestamp", "counts", "off_wrist", "marker")
    m = match_columns(header, roles)
    assert m.index == {"timestamp": 0, "counts": 1, "off_wrist": 2, "marker": 3}
    assert set(m.how.values()) == {"synonym"} and m.unknown == ["Lux", "Temperature (C)"]
    m = match_columns(header, roles, explicit={"counts": "lux"})  # study.toml wins, case-insensitive
    assert m.index["counts"] == 4 and m.how["counts"] == "study.toml"
    assert suggest("tried_to_slep", ["night", "tried_to_sleep"]) == "tried_to_sleep"


def test_time_cells_on_the_spreadsheet_day_zero_are_times_of_day():
    from sleepfuse.readers._diary_table import _cell_text

    # Spreadsheets store a time of day as a fraction of day zero (1899-12-30 in the 1900 date system).
    assert _cell_text(dt.datetime(1899, 12, 30, 22, 30)) == "22:30:00"
    assert _cell_text(dt.datetime(2026, 5, 15, 6, 45)) == "2026-05-15T06:45:00"
    assert _cell_text(dt.time(6, 30)) == "06:30:00" and _cell_text(dt.date(2026, 5, 14)) == "2026-05-14"
    assert _cell_text(15.0) == "15" and _cell_text(float("nan")) == ""


def test_quoted_r_style_csv_with_row_names_and_na_reads_like_empty_cells(tmp_path):
    path = tmp_path / "P01_diary.csv"  # as R's write.csv saves a data frame: quotes, row names, NA
    path.write_text('"","night","bedtime","tried_to_sleep","sol_min","nwak","waso_min","final_awakening","out_of_bed","quality"\n'
                    '"1","2026-05-14","22:10","22:30",15,2,20,"06:30","06:45",NA\n'
                    '"2","2026-05-15",NA,"23:20",10,1,5,"07:00","07:10",4\n')
    ref = tmp_path / "ref" / "P01_diary.csv"
    ref.parent.mkdir()
    ref.write_text(CSV.replace(",3\n", ",\n").replace("2026-05-15,23:05,", "2026-05-15,,"))
    got, want = read_diary(path, TZ, participant="P01"), read_diary(ref, TZ, participant="P01")
    assert got.entries == want.entries and got.entries[0].quality is None and got.entries[1].bedtime is None
    assert not [p for p in got.problems if p.severity != "info"]
