"""The study report (sleepfuse/output/report.py): structure, nothing external, every participant, methods.

The checks are structural (common practice for generated documents): the
sections of the report issue in order, figures inline, nothing fetched from
elsewhere (no http, script, @import, src=), and the content traced to the
tables it comes from. A slow check opens the page in a real browser.
"""

from __future__ import annotations

import json
import re
import shutil
import subprocess
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest

from sleepfuse.run.batch import BatchOptions, algorithm_provenance, run_batch
from sleepfuse.cli.main import main
from sleepfuse.model.config import load_config
from sleepfuse.output import methods as methods_text
from sleepfuse.output.report import REPORT_FILE, SECTIONS, context, load_output, rebuild_report, render, scoped_svg
from sleepfuse.study.review import record_decision

from conftest import make_messy_study

PATIENT = b"X F 02-FEB-1981 Nobody_Testperson"


@pytest.fixture(scope="module")
def run(tmp_path_factory):
    """The messy study (2 good participants, 3 with bad files), an EDF carrying a patient name, one review."""
    root = make_messy_study(tmp_path_factory.mktemp("report") / "study")
    edf = root / "psg" / "P01_20261031.edf"
    data = bytearray(edf.read_bytes())
    data[8:88] = PATIENT.ljust(80)  # EDF header: local patient identification, bytes 8-87 (EDF spec)
    edf.write_bytes(bytes(data))
    record_decision(root, "P02", "2026-10-29", "actigraphy", "exclude", "watch left on the charger")
    out = root.parent / "out"
    result = run_batch(root, BatchOptions(out=out, report=True, cache=False), argv=["test"])
    return root, out, result, (out / REPORT_FILE).read_text(encoding="utf-8")


class _Outline(HTMLParser):
    def __init__(self):
        super().__init__()
        self.sections, self.ids, self.tags = [], [], []

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        self.tags.append((tag, a))
        if "id" in a:
            self.ids.append(a["id"])
        if tag == "section":
            self.sections.append(a.get("id"))


def _outline(html: str) -> _Outline:
    parser = _Outline()
    parser.feed(html)
    return parser


def test_sections_in_the_order_of_the_issue(run):
    *_, html = run
    outline = _outline(html)
    assert outline.sections == [anchor for anchor, _ in SECTIONS]
    headings = re.findall(r"<h2>(\d)\. ([^<]+)</h2>", html)
    assert [int(n) for n, _ in headings] == list(range(1, 10))
    assert [t for _, t in headings] == [title for _, title in SECTIONS]


def test_one_self_contained_file(run):
    _, out, result, html = run
    assert html.count("<style") == 1
    low = html.lower()
    for banned in ("http", "<script", "@import", "src=", "<link", "<iframe", "@font-face"):
        assert banned not in low, banned
    assert set(re.findall(r"url\(([^)]*)\)", html)) <= {f"#{i}" for i in _outline(html).ids}
    assert "Research use only" in html and "does not diagnose" in html


def test_figures_are_inline_svg_with_ids_unique_in_the_page(run):
    _, out, result, html = run
    outline = _outline(html)
    drawn = result.tables["agreement"]
    n_figures = sum(1 for tag, _ in outline.tags if tag == "svg")
    assert n_figures >= 10  # the two good participants give figures for every pair
    assert len(outline.ids) == len(set(outline.ids))
    refs = set(re.findall(r'href="#([^"]+)"', html)) | set(re.findall(r"url\(#([^)]+)\)", html))
    assert refs <= set(outline.ids)  # every reference of a figure points inside the page
    assert "Mean of actigraphy and PSG (min)" in html  # text stays text, so it prints sharp and is searchable
    assert len(drawn) >= n_figures


def test_every_participant_is_in_the_grid_and_the_excluded_night_says_why(run):
    _, _, result, html = run
    for pid in result.tables["matrix"]["participant"]:
        assert f'<th class="who">{pid}</th>' in html
    assert "X99" not in re.search(r'<section id="completeness">.*?</section>', html, re.S).group(0)
    assert 'title="P02 2026-10-29 excluded: ' in html and "watch left on the charger" in html
    review = re.search(r'<section id="review">.*?</section>', html, re.S).group(0)
    assert "watch left on the charger" in review and "exclude" in review


def test_qc_table_names_file_participant_night_and_message(run):
    _, _, result, html = run
    qc = result.tables["qc"]
    for _, e in qc[qc["severity"] == "error"].iterrows():
        assert str(e["file"]) in html and str(e["participant"]) in html
    n_err = int((qc["severity"] == "error").sum())
    assert f"<strong>{n_err}</strong> error{'s' if n_err != 1 else ''}" in html


def test_no_edf_header_field_reaches_the_report(run):
    root, _, _, html = run
    assert PATIENT in (root / "psg" / "P01_20261031.edf").read_bytes()
    assert "Nobody_Testperson" not in html and "02-FEB-1981" not in html


def test_report_command_rebuilds_the_same_report_without_scoring(run, tmp_path, monkeypatch):
    _, out, _, html = run
    copy = tmp_path / "out"
    shutil.copytree(out, copy)
    (copy / REPORT_FILE).unlink()
    import sleepfuse.run.engine as engine
    import sleepfuse.run.participant as participant

    for module, name in ((participant, "process_participant"), (engine, "process_participant")):
        monkeypatch.setattr(module, name, lambda *a, **k: pytest.fail("the report scored"))
    assert main(["report", str(copy)]) == 0
    again = (copy / REPORT_FILE).read_text(encoding="utf-8")
    strip = lambda text: re.sub(r"report written [^<]*", "", text)  # noqa: E731
    assert strip(again) == strip(html)


def test_report_of_a_folder_without_provenance_is_a_clear_error(tmp_path, capsys):
    (tmp_path / "nights.csv").write_text("participant\n")
    assert main(["report", str(tmp_path)]) == 1
    err = capsys.readouterr().err
    assert "provenance.json" in err and "sleepfuse batch" in err
    assert not (tmp_path / REPORT_FILE).exists()


@pytest.fixture
def quick_figures(monkeypatch):
    """A placeholder for each figure, for checks of the tables only (the figure checks above draw them)."""
    import sleepfuse.output.figures as plots

    monkeypatch.setattr(plots, "svg_text", lambda fig: '<svg viewBox="0 0 1 1"><g id="a"/></svg>')


def test_parquet_output_folder_rebuilds_too(run, tmp_path, quick_figures):
    root, _, _, _ = run
    out = tmp_path / "pq"
    run_batch(root, BatchOptions(out=out, format="parquet", cache=False), argv=["test"])
    path = rebuild_report(out)
    assert '<section id="codebook">' in path.read_text(encoding="utf-8")


def _provenance(root: Path, toml_extra: str) -> dict:
    study = root / "cfg"
    study.mkdir(exist_ok=True)
    (study / "study.toml").write_text('[study]\nname = "m"\ntimezone = "Europe/Oslo"\n' + toml_extra)
    config = load_config(study)
    return {"version": "0", "configuration": config.to_dict(), "algorithm": algorithm_provenance(config)}


def test_methods_text_follows_the_configuration(tmp_path):
    ck = methods_text.methods(_provenance(tmp_path, "[actigraphy]\ncount_scale = 0.01\n"))
    sadeh = methods_text.methods(_provenance(tmp_path, '[actigraphy]\nalgorithm = "sadeh"\nnonwear = "none"\n'
                                                       "[scoring]\nlps_run_min = 20\n"))
    ck_text, sadeh_text = " ".join(ck["paragraphs"]), " ".join(sadeh["paragraphs"])
    assert "Cole, Kripke et al. (1992)" in ck_text and "count scale of 0.01" in ck_text
    assert "P = 0.001, weights 106, 54, 58, 76, 230, 74, 67" in ck_text and "Webster" in ck_text
    assert "Choi et al. (2011)" in ck_text and "Europe/Oslo" in ck_text
    assert "Sadeh et al. (1994)" in sadeh_text and "Cole" not in sadeh_text
    assert "No non-wear detection" in sadeh_text and "20 min of uninterrupted sleep" in sadeh_text
    assert any(r.startswith("Sadeh A") for r in sadeh["references"])
    assert not any(r.startswith("Choi L") for r in sadeh["references"])
    assert any(r.startswith("Choi L") for r in ck["references"])


def test_agreement_columns_of_the_nested_statistics_are_shown(run, quick_figures):
    """Columns the nested-nights statistics add (by_construction, methods, corrected-limit CIs, inf count)."""
    _, out, _, _ = run
    tables, provenance = load_output(out)
    ag = tables["agreement"].copy()
    ag["by_construction"] = (ag["pair"] == "diary-actigraphy") & (ag["parameter"] == "tib_min")
    ag["bias_ci_method"] = "participant-level variance (Bland & Altman 2007)"
    ag["loa_ci_method"] = "cluster bootstrap"
    ag["mn_loa_ci_method"] = "cluster bootstrap"
    ag["ccc_ci_method"] = "cluster bootstrap"
    ag["prop_bias_method"] = "mixed model, random intercept per participant"
    ag.loc[ag["pair"] == "diary-psg", "loa_ci_method"] = "exact (Carkeet 2015)"
    for side in ("low", "high"):
        ag[f"mn_loa_{side}_ci_low"] = ag[f"mn_loa_{side}"] - 1.25
        ag[f"mn_loa_{side}_ci_high"] = ag[f"mn_loa_{side}"] + 1.25
    ag["n_inf_dropped"] = 0
    ag.loc[ag.index[0], "n_inf_dropped"] = 2
    ag.loc[ag.index[0], "prop_p"] = 3.6e-6
    ag.loc[ag.index[0], "prop_slope"] = 0.64
    tables["agreement"] = ag
    html = render(context(tables, provenance))
    assert "identical by construction" in html
    assert "mixed model, random intercept per participant" in html and "cluster bootstrap" in html
    assert "2 infinite pair(s) left out" in html
    per_pair = re.findall(r"Methods for this pair: ([^<]*)", html)
    assert len(per_pair) == 3 and "exact (Carkeet 2015)" in per_pair[1]
    assert "exact" not in per_pair[0] and "confidence intervals of the limits: cluster bootstrap" in per_pair[0]
    assert any(r.startswith("Carkeet A") for r in re.findall(r"<li>([^<]*)</li>", html))
    assert "0.64 (p &lt; 0.001)" in html
    first = ag.iloc[0]
    assert f"{first['mn_loa_low'] - 1.25:.1f}".replace("-", "−") in html
    methods = re.search(r'<section id="methods".*?</section>', html, re.S).group(0)
    assert "mixed model, random intercept per participant" in methods
    # the row agreeing by construction has no figure and is not among the nights to look at
    look = re.search(r'<section id="nights">.*?</section>', html, re.S).group(0)
    assert "TIB" not in look.split("diary − actigraphy")[-1]


def test_scoped_svg_prefixes_every_id_and_reference():
    svg = ('<?xml version="1.0"?>\n<!DOCTYPE svg PUBLIC "-//W3C//DTD SVG 1.1//EN" "http://www.w3.org/x.dtd">\n'
           '<svg xmlns:xlink="http://www.w3.org/1999/xlink" width="10pt" height="5pt" viewBox="0 0 10 5" '
           'xmlns="http://www.w3.org/2000/svg"><metadata><rdf:RDF xmlns:dc="http://purl.org/dc/"/></metadata>'
           '<defs><path id="m1"/><clipPath id="c1"/></defs><g clip-path="url(#c1)"><use xlink:href="#m1"/></g></svg>')
    out = scoped_svg(svg, "f3-")
    assert out.startswith("<svg") and "http" not in out and "width=" not in out
    assert 'id="f3-m1"' in out and 'url(#f3-c1)' in out and 'xlink:href="#f3-m1"' in out


def test_template_ships_as_package_data():
    import tomllib
    from importlib.resources import files

    assert (files("sleepfuse.output") / "templates" / "report.html.j2").is_file()
    pyproject = tomllib.loads((Path(__file__).parents[1] / "pyproject.toml").read_text())
    assert "output/templates/*.j2" in pyproject["tool"]["setuptools"]["package-data"]["sleepfuse"]
    assert any(d.startswith("jinja2") for d in pyproject["project"]["dependencies"])


def _chromium() -> str | None:
    return shutil.which("chromium") or shutil.which("chromium-browser")


@pytest.mark.slow
@pytest.mark.skipif(_chromium() is None, reason="needs Chromium (apt-get install chromium); CI has none")
def test_report_renders_in_a_headless_browser(run, tmp_path):
    from PIL import Image

    _, out, _, _ = run
    shot = tmp_path / "report.png"
    subprocess.run([_chromium(), "--headless", "--no-sandbox", "--disable-gpu", "--no-first-run",
                    "--disable-background-networking", "--disable-component-update", "--disable-sync",
                    f"--user-data-dir={tmp_path / 'profile'}", f"--screenshot={shot}", "--window-size=1280,2400",
                    (out / REPORT_FILE).resolve().as_uri()], check=True, capture_output=True, timeout=180)
    grey = np.asarray(Image.open(shot).convert("L"), dtype=float)
    assert grey.shape == (2400, 1280)
    dark = grey < 100  # text and lines
    assert dark.mean() > 0.005, "the page looks blank"
    assert grey.std() > 10
    # content runs down the page, not only in a strip at the top
    assert dark[1200:].mean() > 0.002


def test_batch_reports_progress_of_the_report_step(run, tmp_path, quick_figures):
    """Issue: batch progress must not stall silently while figures and the report are written."""
    root, _, _, _ = run
    calls: dict[str, list] = {}

    def step(label):
        return lambda item, i, n: calls.setdefault(label, []).append((item, i, n))

    run_batch(root, BatchOptions(out=tmp_path / "o", report=True, cache=False), argv=["t"], step_progress=step)
    assert list(calls) == ["report"]
    report = calls["report"]
    n = report[-1][2]
    assert n >= 10 and report[-1] == ("", n, n) and [c[1] for c in report[:-1]] == list(range(n))


def test_progress_bars_show_one_bar_per_step(capsys):
    from sleepfuse.cli.progress import progress_bars

    with progress_bars(enabled=True) as bar:
        bar("participants")("P01", 1, 2)
        bar("figures")("actigraphy-psg_tst_min", 0, 25)
    err = capsys.readouterr().err
    assert "participants" in err and "figures" in err and "25/25" in err  # finished bars are completed


def test_batch_command_line_writes_the_report_before_provenance(run, tmp_path, quick_figures):
    root, _, _, _ = run
    out = tmp_path / "o"
    assert main(["batch", str(root), "--out", str(out), "--report", "--no-cache"]) == 0
    prov = json.loads((out / "provenance.json").read_text())
    assert prov["options"]["report"] is True and "report.html" in prov["outputs"]
    assert (out / REPORT_FILE).stat().st_mtime_ns <= (out / "provenance.json").stat().st_mtime_ns
    assert not list(out.glob(".*.tmp"))


def test_codebook_lists_every_matrix_column(run):
    _, _, result, html = run
    section = re.search(r'<section id="codebook">.*?</section>', html, re.S).group(0)
    for name in result.tables["codebook"]["name"]:
        assert f"<code>{name}</code>" in section, name
    assert "Mean and SD (ddof=1) over the participant" in section


def test_report_of_a_study_where_nothing_could_be_read(tmp_path, quick_figures):
    """Bad input gets a clear report too: every participant listed, each bad file marked and named."""
    study = tmp_path / "bad"
    (study / "psg").mkdir(parents=True)
    (study / "actigraphy").mkdir()
    (study / "psg" / "P01_x.edf").write_text("garbage")
    (study / "actigraphy" / "P02_x.csv").write_text("time,activity\n1,2\n")
    assert main(["batch", str(study), "--out", str(tmp_path / "o"), "--report", "--no-cache"]) == 1
    html = (tmp_path / "o" / REPORT_FILE).read_text(encoding="utf-8")
    grid = re.search(r'<section id="completeness">.*?</section>', html, re.S).group(0)
    assert '<th class="who">P01</th>' in grid and '<th class="who">P02</th>' in grid
    assert 'title="psg/P01_x.edf: PSG file not read' in grid
    assert "<strong>2</strong> errors" in html
    assert "<svg" not in html  # no figure without nights: the tables say "fewer than 3 paired nights"


def test_text_from_the_study_is_escaped(run, quick_figures):
    _, out, _, _ = run
    tables, provenance = load_output(out)
    provenance["configuration"]["study"]["name"] = "<script>alert(1)</script> & co"
    html = render(context(tables, provenance))
    assert "<script" not in html and "&lt;script&gt;alert(1)&lt;/script&gt; &amp; co" in html
