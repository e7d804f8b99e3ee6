"""The data of each report section, from the output tables and provenance (no scoring, no files).

Every function takes plain tables (as written to the output folder) and
returns rows of text ready for the template; numbers go through
``sleepfuse.model.numbers`` (with the typographic minus, as in the figures).
"""

from __future__ import annotations

import datetime as dt
import fnmatch
from collections import Counter

import numpy as np
import pandas as pd

from sleepfuse.model import numbers
from sleepfuse.model.definitions import LABELS, PAIRS, PARAMETERS, SOURCE_NAMES, pair_name
from sleepfuse.output.agreement_rows import (by_construction, flag, interval_text, number_text,
                                             proportional_bias_flagged)

SOURCES = tuple(SOURCE_NAMES)
STATUS = {  # letter, name: the grid reads without colour
    "included": ("I", "included"),
    "excluded": ("X", "excluded"),
    "problem": ("!", "QC problem"),
    "missing": ("·", "missing"),
}
NIGHTS_TO_LOOK_AT = 5
"""Nights listed per pair in 'Nights to look at' (common practice: a short list to spot-check first)."""



def _label(parameter: str) -> str:
    return LABELS.get(parameter, parameter)


def _when(text) -> str:
    try:
        return dt.datetime.fromisoformat(str(text)).strftime("%Y-%m-%d %H:%M UTC")
    except ValueError:
        return str(text or "–")


def summary(tables: dict, provenance: dict) -> dict:
    nights = tables["nights"]
    config = provenance.get("configuration", {}) or {}
    study = config.get("study", {}) or {}
    per_source = []
    for source in SOURCES:
        rows = nights[nights["source"] == source] if not nights.empty else nights
        per_source.append({"source": SOURCE_NAMES[source], "included": int(rows["included"].sum()) if len(rows) else 0,
                           "nights": int(len(rows)),
                           "participants": int(rows.loc[rows["included"], "participant"].nunique()) if len(rows) else 0})
    dates = sorted(str(n) for n in nights["night"].dropna().unique()) if not nights.empty else []
    started, finished = provenance.get("started"), provenance.get("finished")
    try:
        seconds = (dt.datetime.fromisoformat(finished) - dt.datetime.fromisoformat(started)).total_seconds()
        duration = f"{seconds:.1f} s"
    except (TypeError, ValueError):
        duration = "–"
    zone = study.get("timezone") or "–"
    if study.get("timezone_from_machine"):
        zone += " (the machine's zone: study.toml sets none)"
    return {
        "name": study.get("name") or "Unnamed study",
        "participants": participants(tables),
        "per_source": per_source,
        "first_night": dates[0] if dates else "–",
        "last_night": dates[-1] if dates else "–",
        "timezone": zone,
        "version": provenance.get("version", "–"),
        "started": _when(started),
        "duration": duration,
        "options": _options(provenance.get("options") or {}),
        "counts": provenance.get("counts", {}),
    }


_OPTION_NAMES = {"format": "format", "plots": "figures", "report": "report", "workers": "workers",
                 "zscore": "z-scored matrix", "min_nights": "fewest nights", "cache": "cache",
                 "scheduler": "scheduler"}


def _options(options: dict) -> list[str]:
    """The batch options as words: "figures yes", "workers 2"."""
    def word(v) -> str:
        if isinstance(v, bool):
            return "yes" if v else "no"
        return "none" if v is None else str(v)

    return [f"{_OPTION_NAMES.get(k, k)} {word(v)}" for k, v in options.items()]


def participants(tables: dict) -> list[str]:
    """Every participant of the run: the matrix's rows and anyone in the night table (files of people
    outside ``[study] participants`` appear only in the QC log)."""
    names = set()
    for name in ("matrix", "nights"):
        df = tables.get(name)
        if df is not None and "participant" in df:
            names |= {str(p) for p in df["participant"].dropna() if str(p).strip()}
    return sorted(names)


def _source_of(file: str, message: str, patterns: dict) -> str | None:
    """The instrument a QC entry is about: by its file (the [files] patterns), else its message's prefix."""
    for source in SOURCES:
        pattern = patterns.get(source)
        if file and pattern and fnmatch.fnmatch(file, pattern):
            return source
    for source in SOURCES:
        if message.startswith(f"{source}:"):
            return source
    return None


def completeness(tables: dict, provenance: dict) -> dict:
    """A participant × night grid per instrument: included, excluded (reason), missing or QC problem."""
    nights, qc = tables["nights"], tables["qc"]
    who = participants(tables)
    patterns = ((provenance.get("configuration") or {}).get("files") or {})
    problems: dict[tuple, list[str]] = {}
    file_problems: dict[tuple, list[str]] = {}  # (participant, source): problems of a whole file, no night
    for _, e in qc[qc["severity"].isin(["error", "warning"])].iterrows() if not qc.empty else ():
        source = _source_of(str(e["file"] or ""), str(e["message"]), patterns)
        if not source:
            continue
        if str(e["night"] or "").strip():
            problems.setdefault((str(e["participant"]), str(e["night"]), source), []).append(str(e["message"]))
        else:
            file_problems.setdefault((str(e["participant"]), source), []).append(f"{e['file']}: {e['message']}")
    dates = sorted({str(n) for n in nights["night"].dropna()} | {k[1] for k in problems}) if not nights.empty \
        else sorted({k[1] for k in problems})
    rows_by_key = {(str(r.participant), str(r.night), str(r.source)): r
                   for r in nights.itertuples(index=False)} if not nights.empty else {}
    grids, excluded = [], []
    for source in SOURCES:
        rows = []
        for pid in who:
            cells = []
            for night in dates:
                key = (pid, night, source)
                row = rows_by_key.get(key)
                note = "; ".join(problems.get(key, []))
                if row is not None and not flag(row.included):
                    status, note = "excluded", str(row.qc if isinstance(row.qc, str) else "")
                    excluded.append({"participant": pid, "night": night, "source": SOURCE_NAMES[source],
                                     "reason": note or "–"})
                elif key in problems:
                    status = "problem"
                elif row is not None:
                    status = "included"
                else:
                    status = "missing"
                letter, name = STATUS[status]
                cells.append({"status": status, "letter": letter, "title": f"{pid} {night} {name}"
                              + (f": {note}" if note else "")})
            whole = file_problems.get((pid, source), [])
            letter, name = STATUS["problem" if whole else "missing"]
            rows.append({"participant": pid, "cells": cells, "file": {
                "status": "problem" if whole else "none", "letter": letter if whole else "",
                "title": "; ".join(whole)}})
        grids.append({"source": SOURCE_NAMES[source], "rows": rows})
    return {"dates": dates, "short_dates": [d[5:] for d in dates], "grids": grids, "excluded": excluded,
            "legend": list(STATUS.values())}


def qc_section(tables: dict) -> dict:
    qc = tables["qc"]
    counts = Counter(str(s) for s in qc["severity"]) if not qc.empty else Counter()
    shown = qc[qc["severity"].isin(["error", "warning"])] if not qc.empty else qc
    order = {"error": 0, "warning": 1}
    shown = shown.assign(_o=shown["severity"].map(order)).sort_values(["_o", "participant", "night"], kind="stable") \
        if not shown.empty else shown
    rows = [{k: ("" if pd.isna(e[k]) else str(e[k])) for k in ("severity", "file", "participant", "night", "message")}
            for _, e in shown.iterrows()]
    return {"counts": [(s, counts.get(s, 0)) for s in ("error", "warning", "info")], "rows": rows}


def parameter_section(tables: dict) -> list[dict]:
    """Per source and parameter over included nights: n, mean, SD, median, IQR."""
    from sleepfuse.scoring.nights import SOURCE_PARAMETERS

    nights = tables["nights"]
    out = []
    for source in SOURCES:
        rows = nights[(nights["source"] == source) & nights["included"].map(flag)] if not nights.empty else nights
        table = []
        for param in SOURCE_PARAMETERS[source]:
            if param not in rows:
                continue
            v = pd.to_numeric(rows[param], errors="coerce").to_numpy(float)
            v = v[np.isfinite(v)]
            if v.size == 0:
                continue
            q1, med, q3 = np.percentile(v, [25, 50, 75])
            table.append({"parameter": param, "label": _label(param), "unit": PARAMETERS[param].unit, "n": v.size,
                          "mean": number_text(v.mean()), "sd": number_text(v.std(ddof=1) if v.size > 1 else np.nan),
                          "median": number_text(med), "iqr": f"{number_text(q1)} – {number_text(q3)}"})
        out.append({"source": SOURCE_NAMES[source], "rows": table})
    return out


def _ci(row: dict, low: str, high: str, digits: int = 1) -> str:
    return interval_text(row.get(low), row.get(high), digits)


def agreement_rows(agreement: pd.DataFrame, pair: str) -> list[dict]:
    """The report's agreement table of one pair: one row per parameter."""
    rows = []
    for _, r in agreement[agreement["pair"] == pair].iterrows():
        s = r.to_dict()
        note = str(s.get("note") if isinstance(s.get("note"), str) else "")
        base = {"parameter": s["parameter"], "label": _label(s["parameter"]), "unit": s.get("unit") or "",
                "n": f"{number_text(s.get('n_nights'), 0)} / {number_text(s.get('n_participants'), 0)}"}
        if by_construction(s):
            rows.append({**base, "by_construction": True, "note": "identical by construction"})
            continue
        prop = "–"
        if np.isfinite(pd.to_numeric(s.get("prop_slope"), errors="coerce")):
            prop = f"{number_text(s.get('prop_slope'), 2)} ({numbers.format_p_text(s.get('prop_p'))})"
        rows.append({
            **base, "by_construction": False,
            "bias": number_text(s.get("bias")), "bias_ci": _ci(s, "bias_ci_low", "bias_ci_high"),
            "loa": interval_text(s.get("loa_low"), s.get("loa_high")),
            "loa_low_ci": _ci(s, "loa_low_ci_low", "loa_low_ci_high"),
            "loa_high_ci": _ci(s, "loa_high_ci_low", "loa_high_ci_high"),
            "mn_loa": interval_text(s.get("mn_loa_low"), s.get("mn_loa_high")),
            "mn_loa_low_ci": _ci(s, "mn_loa_low_ci_low", "mn_loa_low_ci_high"),
            "mn_loa_high_ci": _ci(s, "mn_loa_high_ci_low", "mn_loa_high_ci_high"),
            "ratio": interval_text(s.get("ratio_loa_low"), s.get("ratio_loa_high"), 2),
            "ccc": number_text(s.get("ccc"), 2), "ccc_ci": _ci(s, "ccc_ci_low", "ccc_ci_high", 2),
            "icc": number_text(s.get("icc"), 2), "prop": prop,
            "prop_flagged": proportional_bias_flagged(s),
            "n_inf": int(pd.to_numeric(s.get("n_inf_dropped"), errors="coerce") or 0)
            if np.isfinite(pd.to_numeric(s.get("n_inf_dropped"), errors="coerce")) else 0,
            "note": note,
        })
    return rows


def epoch_section(tables: dict) -> dict:
    e = tables["epochs_agreement"]
    rows = []
    for _, r in e.iterrows():
        pooled = str(r["participant"]).startswith("(")
        rows.append({"participant": str(r["participant"]), "night": "" if pd.isna(r["night"]) else str(r["night"]),
                     "pooled": pooled, "n_epochs": number_text(r.get("n_epochs"), 0),
                     "sensitivity": number_text(r.get("sensitivity"), 3),
                     "specificity": number_text(r.get("specificity"), 3),
                     "accuracy": number_text(r.get("accuracy"), 3), "kappa": number_text(r.get("kappa"), 2),
                     "offset": number_text(r.get("clock_offset_min"), 0, signed=True),
                     "kappa_at_offset": number_text(r.get("kappa_at_offset"), 2),
                     "flagged": flag(r.get("offset_flag"))})
    rows.sort(key=lambda r: r["pooled"])  # pooled last
    return {"rows": rows, "n_flagged": sum(r["flagged"] for r in rows)}


def nights_to_look_at(tables: dict, *, per_pair: int = NIGHTS_TO_LOOK_AT) -> list[dict]:
    """Per pair, the nights farthest outside the limits on any parameter, with their likely reason."""
    from sleepfuse.fusion.disagreement import rank_disagreements

    nights, agreement = tables["nights"], tables["agreement"]
    epochs = tables["epochs_agreement"]
    epochs = epochs[~epochs["participant"].astype(str).str.startswith("(")] if not epochs.empty else epochs
    out = []
    for test, reference in PAIRS:
        pair = pair_name(test, reference)
        worst: dict[tuple, dict] = {}
        for _, stats in agreement[agreement["pair"] == pair].iterrows():
            if by_construction(stats.to_dict()) or not np.isfinite(pd.to_numeric(stats["loa_low"], errors="coerce")):
                continue
            param = stats["parameter"]
            ranked = rank_disagreements(nights, test, reference, param, agreement=agreement, epoch_rows=epochs)
            for r in ranked.head(per_pair).itertuples(index=False):
                if not np.isfinite(r.loa_ratio):
                    continue
                key = (str(r.participant), str(r.night))
                item = worst.setdefault(key, {"participant": key[0], "night": key[1], "score": 0.0,
                                              "parameters": [], "reasons": set()})
                item["score"] = max(item["score"], abs(r.loa_ratio))
                unit = PARAMETERS[param].unit
                item["parameters"].append(
                    (abs(r.loa_ratio), f"{_label(param)} {number_text(r.difference, 1, signed=True)} {unit}, "
                     f"{number_text(abs(r.loa_ratio), 1)} ×LoA" + (" (beyond)" if r.beyond_loa else "")))
                item["reasons"] |= {x for x in str(r.reason).split("; ") if x}
        ranked_nights = sorted(worst.values(), key=lambda i: -i["score"])[:per_pair]
        for item in ranked_nights:
            item["parameters"] = [t for _, t in sorted(item["parameters"], key=lambda p: -p[0])[:3]]
            item["reasons"] = "; ".join(sorted(item["reasons"])) or "none found"
        out.append({"pair": pair, "test": SOURCE_NAMES[test], "reference": SOURCE_NAMES[reference],
                    "rows": ranked_nights})
    return out


def review_section(provenance: dict) -> dict:
    review = provenance.get("review_decisions") or {}
    rows = [{k: str(d.get(k, "") or "") for k in ("participant", "night", "source", "decision", "reason", "decided_at")}
            for d in review.get("decisions") or []]
    return {"file": review.get("file"), "rows": rows}


def codebook_rows(tables: dict) -> list[dict]:
    """The codebook, a participant's mean and SD of one parameter on one row (codebook.csv keeps them apart)."""
    cb = tables["codebook"]
    text = lambda v: "" if v is None or (isinstance(v, float) and v != v) else str(v)  # noqa: E731
    rows: list[dict] = []
    by_param: dict[tuple, dict] = {}
    for _, r in cb.iterrows():
        source, param, stat = text(r["source"]), text(r["parameter"]), text(r["statistic"])
        definition = text(r["definition"])
        item = {"names": [text(r["name"])], "source": source, "statistic": stat, "unit": text(r["unit"]),
                "definition": definition, "n": [number_text(r.get("n_nonmissing"), 0)],
                "skewness": [number_text(r.get("skewness"), 2)]}
        key = (source, param)
        if param and stat in ("mean", "sd") and key in by_param:
            first = by_param[key]
            first["names"] += item["names"]
            first["statistic"] += " / " + stat.upper() if stat == "sd" else " / " + stat
            first["n"] += item["n"]
            first["skewness"] += item["skewness"]
            if first["definition"].startswith("Mean over ") and not first.get("merged"):
                first["definition"] = "Mean and SD (ddof=1) over " + first["definition"][len("Mean over "):]
                first["merged"] = True
            continue
        if param and stat in ("mean", "sd"):
            by_param[key] = item
        rows.append(item)
    for item in rows:
        item["n"] = " / ".join(item["n"])
        item["skewness"] = " / ".join(item["skewness"])
        if item["statistic"] == "sd":
            item["statistic"] = "SD"
    return rows
