"""A clean study re-saved the ways labs save files (invented demo data only).

Each style writes the same values in another dialect: delimiter, decimal
mark, encoding, line ends, metadata lines above the header, summary lines
below, split date and time columns, day-first or month-first dates, two-digit
years, a 12-hour clock, the trade's column names; diaries as workbooks.
Column names are our own neutral words.
"""

from __future__ import annotations

import shutil
from pathlib import Path

import pandas as pd

ROOT = Path(__file__).resolve().parents[1]
SAMPLE = ROOT / "sample_records"


def _text(lines: list[str], path: Path, *, encoding: str = "utf-8", newline: str = "\n") -> None:
    path.write_bytes(newline.join(lines + [""]).encode(encoding))


def actigraphy_styles() -> dict[str, callable]:
    """style name -> writer(frame with 'timestamp' (datetime64), 'counts' (int) and maybe 'off_wrist', path)."""

    def extra(df, sep, name="Non-wear"):  # the off-wrist flags, when the file has them, under a trade name
        if "off_wrist" not in df:
            return "", [""] * len(df)
        return sep + name, [f"{sep}{int(v)}" for v in df.off_wrist]

    def semicolon_latin1(df, path):  # metadata lines, day-first dots, split columns, decimal comma, CRLF, Latin-1
        head, flags = extra(df, ";")
        rows = [f"{t:%d.%m.%Y};{t:%H:%M:%S};{c},0{f}" for t, c, f in zip(df.timestamp, df.counts, flags)]
        epoch = int((df.timestamp.iloc[1] - df.timestamp.iloc[0]).total_seconds())
        lines = ["Study export; invented data", "Remarque: données inventées", f"Epoch length: {epoch}",
                 "", "Date;Time;Activity (counts)" + head, *rows, f"Total;;{df.counts.sum()},0"]
        _text(lines, path.with_suffix(".csv"), encoding="latin-1", newline="\r\n")

    def utf16_tab_month_first_12h(df, path):  # UTF-16 with BOM, tab, M/D/YYYY 12-hour clock
        head, flags = extra(df, "\t", "Off-wrist")
        rows = [f"{t.month}/{t.day}/{t.year} {t:%I:%M:%S %p}\t{c}{f}" for t, c, f in zip(df.timestamp, df.counts, flags)]
        _text(["Date/Time\tActivity" + head, *rows], path.with_suffix(".txt"), encoding="utf-16")

    def pipe_cr_two_digit_year(df, path):  # pipe, old-Mac CR line ends, D-M-YY
        head, flags = extra(df, "|", "NONWEAR")
        rows = [f"{t:%d-%m-%y %H:%M:%S}|{c}{f}" for t, c, f in zip(df.timestamp, df.counts, flags)]
        _text(["DATETIME|COUNTS" + head, *rows], path.with_suffix(".csv"), newline="\r")

    def bom_fractional_seconds(df, path):  # UTF-8 BOM, ISO with a space and fractional seconds, synonyms
        head, flags = extra(df, ",", "Off wrist")
        rows = [f"{t:%Y-%m-%d %H:%M:%S}.000,{c}{f}" for t, c, f in zip(df.timestamp, df.counts, flags)]
        _text(["Time stamp,Activity counts" + head, *rows], path.with_suffix(".csv"), encoding="utf-8-sig")

    return {f.__name__: f for f in (semicolon_latin1, utf16_tab_month_first_12h, pipe_cr_two_digit_year,
                                    bom_fractional_seconds)}


def diary_styles() -> dict[str, callable]:
    """style name -> writer(frame of the contract's diary columns, as text, path without suffix)."""

    def workbook_xlsx(df, path):  # time cells, date cells, number cells; a title row above the header
        sheet = _typed(df)
        with pd.ExcelWriter(path.with_suffix(".xlsx"), engine="openpyxl") as xl:
            pd.DataFrame([["Sleep diary (invented)"]]).to_excel(xl, sheet_name="Diary", header=False, index=False)
            sheet.to_excel(xl, sheet_name="Diary", index=False, startrow=2)
            pd.DataFrame([["notes"]]).to_excel(xl, sheet_name="Notes", header=False, index=False)

    def workbook_ods(df, path):
        with pd.ExcelWriter(path.with_suffix(".ods"), engine="odf") as xl:
            _typed(df).to_excel(xl, sheet_name="Sheet1", index=False)

    def semicolon_day_first_12h(df, path):  # DD/MM/YYYY nights, 12-hour clock, trade names
        out = df.rename(columns={"night": "Date", "bedtime": "Bed time", "tried_to_sleep": "Lights off",
                                 "sol_min": "SOL", "nwak": "Awakenings", "waso_min": "WASO",
                                 "final_awakening": "Final awakening", "out_of_bed": "Out of bed",
                                 "quality": "Sleep quality"})
        out["Date"] = [_cell(v, "%Y-%m-%d", lambda t: t.strftime("%d/%m/%Y")) for v in out["Date"]]
        for c in ("Bed time", "Lights off", "Final awakening", "Out of bed"):
            out[c] = [_twelve_hour(v) for v in out[c]]
        path.with_suffix(".csv").write_text(out.to_csv(sep=";", index=False, lineterminator="\r\n"), encoding="utf-8")

    return {f.__name__: f for f in (workbook_xlsx, workbook_ods, semicolon_day_first_12h)}


def _typed(df: pd.DataFrame) -> pd.DataFrame:
    """The diary's text as a spreadsheet holds it: date, time, date-time and number cells; the rest text."""
    out = df.copy().astype(object)
    for i, v in out["night"].items():
        out.at[i, "night"] = _cell(v, "%Y-%m-%d", lambda t: t.date())
    for c in ("bedtime", "tried_to_sleep", "final_awakening", "out_of_bed"):
        for i, v in out[c].items():
            out.at[i, c] = _cell(v, "%H:%M", lambda t: t.time(), _cell(v, "%Y-%m-%dT%H:%M", lambda t: t.to_pydatetime()))
    for c in ("sol_min", "nwak", "waso_min", "quality"):
        out[c] = [pd.to_numeric(v, errors="coerce") if _is_number(v) else v for v in out[c]]
    return out


def _cell(text, fmt, convert, otherwise=None):
    try:
        return convert(pd.to_datetime(text, format=fmt))
    except (ValueError, TypeError):
        return otherwise if otherwise is not None else text


def _is_number(text) -> bool:
    try:
        float(text)
        return True
    except (TypeError, ValueError):
        return False


def _twelve_hour(text: str) -> str:
    try:
        return pd.to_datetime(text, format="%H:%M").strftime("%I:%M %p")
    except (ValueError, TypeError):
        return text


def clean_study(root: Path, participants: tuple[str, ...]) -> Path:
    """The demo study's files of ``participants``, with a study.toml that holds only the time zone."""
    for sub in ("psg", "actigraphy", "diary"):
        (root / sub).mkdir(parents=True, exist_ok=True)
    for pid in participants:
        for src in SAMPLE.glob(f"*/{pid}_*"):
            shutil.copy(src, root / src.parent.name / src.name)
    (root / "study.toml").write_text('[study]\ntimezone = "America/Chicago"\n')
    return root


def resave(clean: Path, root: Path, actigraphy_style: str, diary_style: str) -> Path:
    """``clean`` re-saved: every actigraphy file in one style, every diary in another; PSG kept."""
    shutil.copytree(clean / "psg", root / "psg")
    (root / "actigraphy").mkdir()
    (root / "diary").mkdir()
    shutil.copy(clean / "study.toml", root / "study.toml")
    for src in sorted((clean / "actigraphy").glob("*.csv")):
        df = pd.read_csv(src, parse_dates=["timestamp"])
        actigraphy_styles()[actigraphy_style](df, root / "actigraphy" / src.stem)
    for src in sorted((clean / "diary").glob("*.csv")):
        df = pd.read_csv(src, dtype=str, keep_default_na=False)
        diary_styles()[diary_style](df, root / "diary" / src.stem)
    return root


def psg_as_text(edf: Path, path: Path) -> None:
    """An EDF+ hypnogram re-saved as a text hypnogram: one row per 30-s epoch, lights rows, day-first
    date-times with fractional seconds, tab-separated."""
    from sleepfuse.model.stages import STAGE_NAMES, Stage
    from sleepfuse.readers.edf import read_hypnogram

    h = read_hypnogram(edf, "America/Chicago")
    rows = [(t, STAGE_NAMES[Stage(int(c))]) for t, c in zip(h.epoch_times(), h.stages)]
    rows += [(t, label) for t, label in ((h.lights_off, "Lights off"), (h.lights_on, "Lights on")) if t is not None]
    rows.sort(key=lambda r: r[0])
    lines = ["Date/Time\tSleep stage"] + [f"{t:%d/%m/%Y %H:%M:%S.%f}\t{label}" for t, label in rows]
    _text(lines, path.with_suffix(".tsv"))
