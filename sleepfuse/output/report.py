"""The study report: one self-contained HTML file (report.html) from a run's tables and provenance.

Rendered from a Jinja2 template shipped with the package
(``templates/report.html.j2``): one style block, figures inline as SVG, no
scripts, no fonts or images from elsewhere, so it opens offline, from an
e-mail, and prints in grey. It is built from the output tables and
provenance.json only (never the study's files), so ``sleepfuse report
OUTDIR`` rebuilds it without scoring, and no EDF header field can reach it.
"""

from __future__ import annotations

import datetime as dt
import json
import re
from pathlib import Path
from typing import Callable

import pandas as pd

from sleepfuse import RESEARCH_CAUTION
from sleepfuse.output.files import write_text
from sleepfuse.model.definitions import PAIRS, SOURCE_NAMES, pair_name
from sleepfuse.model.errors import ReadError
from sleepfuse.output import methods as methods_text
from sleepfuse.model import numbers
from sleepfuse.output import sections

REPORT_FILE = "report.html"
TABLES = ("nights", "agreement", "epochs_agreement", "matrix", "codebook", "qc")
SECTIONS = (
    ("summary", "Summary"),
    ("completeness", "Data completeness"),
    ("qc", "Quality control"),
    ("parameters", "Parameters"),
    ("agreement", "Agreement"),
    ("nights", "Nights to look at"),
    ("review", "Review decisions applied"),
    ("methods", "Methods"),
    ("codebook", "Codebook of the matrix"),
)
"""The report's sections, in order (issue: one self-contained study report)."""


def load_output(outdir: str | Path) -> tuple[dict[str, pd.DataFrame], dict]:
    """The tables and provenance of a complete output folder (CSV or Parquet), read as written.

    Raises ReadError naming the folder and what is missing.
    """
    outdir = Path(outdir)
    prov_path = outdir / "provenance.json"
    if not prov_path.is_file():
        raise ReadError(outdir, "no provenance.json: not a complete sleepfuse batch output folder "
                                "(run 'sleepfuse batch STUDY --out DIR' first)")
    try:
        provenance = json.loads(prov_path.read_text(encoding="utf-8"))
    except (OSError, ValueError) as exc:
        raise ReadError(prov_path, f"unreadable provenance.json: {exc}") from None
    fmt = (provenance.get("options") or {}).get("format", "csv")
    tables = {}
    for name in TABLES:
        path = outdir / f"{name}.{fmt}"
        if not path.is_file():
            raise ReadError(path, f"{name}.{fmt} is missing from the output folder")
        try:
            if fmt == "parquet":
                tables[name] = pd.read_parquet(path)
            else:
                tables[name] = pd.read_csv(path, dtype={"participant": str, "night": str}, keep_default_na=True)
        except Exception as exc:  # a damaged table is reported with its path, never a traceback
            raise ReadError(path, f"cannot read {path.name}: {type(exc).__name__}: {exc}") from None
    return _normalised(tables), provenance


def _normalised(tables: dict[str, pd.DataFrame]) -> dict[str, pd.DataFrame]:
    """The same types whether the tables come from memory, CSV or Parquet."""
    out = dict(tables)
    for name in ("nights", "qc", "epochs_agreement", "matrix"):
        df = out[name].copy()
        for col in ("participant", "night", "file", "message", "severity", "qc"):
            if col in df:
                df[col] = df[col].map(lambda v: "" if v is None or (isinstance(v, float) and v != v) else str(v))
        out[name] = df
    if "included" in out["nights"]:
        out["nights"]["included"] = out["nights"]["included"].map(sections.flag).astype(bool)
    return out


_ID = re.compile(r'\bid="([^"]+)"')
_URL = re.compile(r"url\(#([^)]+)\)")
_HREF = re.compile(r'(xlink:href|href)="#([^"]+)"')


def scoped_svg(svg: str, prefix: str) -> str:
    """An SVG document as an inline element: no XML prologue, every id prefixed (ids stay unique in the page)."""
    start = svg.find("<svg")
    svg = svg[start:] if start >= 0 else svg
    # inside HTML the parser gives <svg> its namespace; the declarations and metadata only name web addresses
    svg = re.sub(r"<metadata>.*?</metadata>\s*", "", svg, flags=re.S)
    svg = re.sub(r'\sxmlns(:\w+)?="[^"]*"', "", svg)
    # matplotlib's own style rule (round joins, butt caps) is in the page's one style block instead
    svg = re.sub(r"<style[^>]*>.*?</style>\s*", "", svg, flags=re.S)
    svg = _ID.sub(lambda m: f'id="{prefix}{m.group(1)}"', svg)
    svg = _URL.sub(lambda m: f"url(#{prefix}{m.group(1)})", svg)
    svg = _HREF.sub(lambda m: f'{m.group(1)}="#{prefix}{m.group(2)}"', svg)
    # the page's stylesheet sizes the figure; matplotlib's fixed width and height in pt are dropped
    return re.sub(r'<svg([^>]*?)\swidth="[^"]*"\sheight="[^"]*"', r"<svg\1", svg, count=1)


def agreement_figures(tables: dict, progress: Callable[[str, int, int], None] | None = None,
                      svgs: dict | None = None) -> dict:
    """(pair, parameter) -> inline SVG of its Bland–Altman figure, for every row that is drawn.

    ``svgs``: SVG texts already drawn for the plots folder, by (pair, parameter); others are drawn here.
    """
    from sleepfuse.output.agreement_rows import drawable_rows, has_values
    from sleepfuse.output.figures import figure_of_row, svg_text

    # rows without statistics (fewer than MIN_PAIRS nights) say so in the table; the report draws no empty panel
    rows = [r for r in drawable_rows(tables["agreement"]) if has_values(r, "bias", "sd")]
    svgs = svgs or {}
    out = {}
    for i, stats in enumerate(rows):
        key = (stats["pair"], stats["parameter"])
        if progress:
            progress(f"{key[0]}_{key[1]}", i, len(rows))
        text = svgs.get(key) or svg_text(figure_of_row(tables["nights"], stats))
        out[key] = scoped_svg(text, f"f{i}-")
    if progress:
        progress("", len(rows), len(rows))
    return out


def context(tables: dict, provenance: dict, progress: Callable[[str, int, int], None] | None = None,
            svgs: dict | None = None) -> dict:
    """Everything the template shows."""
    from sleepfuse.output.agreement_rows import by_construction, confidence_of

    tables = _normalised(tables)
    agreement = tables["agreement"]
    figures = agreement_figures(tables, progress, svgs)
    pairs = []
    for test, reference in PAIRS:
        pair = pair_name(test, reference)
        rows = sections.agreement_rows(agreement, pair)
        for row in rows:
            row["figure"] = figures.get((pair, row["parameter"]))
        shown = agreement[(agreement["pair"] == pair)
                          & ~agreement.apply(lambda r: by_construction(r.to_dict()), axis=1)] if len(agreement) else agreement
        methods = [f"{methods_text.METHOD_COLUMNS[c]}: {', '.join(v)}"
                   for c, v in methods_text.methods_used(shown).items() if v]
        pairs.append({"pair": pair, "title": f"{SOURCE_NAMES[test]} − {SOURCE_NAMES[reference]}", "rows": rows,
                      "methods": methods})
    config = dict(provenance.get("configuration") or {})
    level = numbers.format_level(confidence_of(agreement.iloc[0].to_dict()) if len(agreement) else None)
    return {
        "sections": SECTIONS,
        "caution": provenance.get("caution") or RESEARCH_CAUTION,
        "summary": sections.summary(tables, provenance),
        "configuration": json.dumps(config, indent=2, ensure_ascii=False, sort_keys=False),
        "algorithm": json.dumps(provenance.get("algorithm") or {}, indent=2, ensure_ascii=False),
        "inputs": provenance.get("inputs") or [],
        "completeness": sections.completeness(tables, provenance),
        "qc": sections.qc_section(tables),
        "parameters": sections.parameter_section(tables),
        "pairs": pairs,
        "epochs": sections.epoch_section(tables),
        "look_at": sections.nights_to_look_at(tables),
        "review": sections.review_section(provenance),
        "methods": methods_text.methods(provenance, agreement, level),
        "codebook": sections.codebook_rows(tables),
        "level": level,
        "generated": dt.datetime.now(dt.timezone.utc).strftime("%Y-%m-%d %H:%M UTC"),
    }


def render(ctx: dict) -> str:
    """The report's HTML from its context, through the packaged Jinja2 template (HTML auto-escaped)."""
    from jinja2 import Environment, PackageLoader, StrictUndefined

    env = Environment(loader=PackageLoader("sleepfuse.output", "templates"), autoescape=True,
                      undefined=StrictUndefined, trim_blocks=True, lstrip_blocks=True)
    return env.get_template("report.html.j2").render(**ctx)


def write_report(path: str | Path, tables: dict, provenance: dict,
                 progress: Callable[[str, int, int], None] | None = None, svgs: dict | None = None) -> Path:
    """Render the report of these tables and provenance into ``path``, atomically.

    ``svgs``: figures already drawn for the plots folder (see ``agreement_figures``).
    """
    return write_text(path, render(context(tables, provenance, progress, svgs)))


def rebuild_report(outdir: str | Path, progress: Callable[[str, int, int], None] | None = None) -> Path:
    """``sleepfuse report OUTDIR``: the report of an existing output folder, without scoring anything."""
    tables, provenance = load_output(outdir)
    return write_report(Path(outdir) / REPORT_FILE, tables, provenance, progress)
