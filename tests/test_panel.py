"""Panel summary and journal-club slide: every number read back from the files.

The exports are read back with the libraries that made them (python-docx, openpyxl,
python-pptx) and pypdf, and each number is compared with the analysis result of the same
outcome (lopside.analysis.analyse). The reviews are the invented samples plus invented
tables made here.
"""

from __future__ import annotations

import csv
import math
import os
import subprocess
import sys
from pathlib import Path

import pytest

from lopside.analysis import analyse
from lopside.appraise import appraise
from lopside.cli_common import load_review_file
from lopside.panel import PANEL_COLUMNS, STUDY_COLUMNS, OutcomeInput, build_panel, reading_lines
from lopside.panel.export import printed_cells, write_panel
from lopside.panel.slide import HEADINGS, write_slide
from lopside.settings import AnalysisSettings

ROOT = Path(__file__).resolve().parents[1]
# the one-outcome samples (the workbook sample is tested in test_workbook.py)
SAMPLES = sorted(p for p in (ROOT / "sample_reviews").glob("*.lopside") if "workbook" not in p.name)
APP = ROOT / "app"
HOSTILE_NAME = '=HYPERLINK("http://example.invalid","x")'


def _inputs(tmp_path) -> list[OutcomeInput]:
    out = []
    for f in SAMPLES:
        review, saved = load_review_file(f)
        out.append(OutcomeInput(review.details.title, review, AnalysisSettings.from_dict(saved)))
    # an outcome with no analysable row, and one whose name a spreadsheet would run
    empty = tmp_path / "empty.csv"
    empty.write_text("study,estimate,lower,upper\nA,,,\nB,,,\n", encoding="utf-8")
    review, _ = load_review_file(empty, "OR")
    out.append(OutcomeInput("Serious adverse events", review, AnalysisSettings()))
    review, saved = load_review_file(SAMPLES[0])
    out.append(OutcomeInput(HOSTILE_NAME, review, AnalysisSettings.from_dict(saved)))
    out.append(OutcomeInput("Length of stay", skipped="stay.csv: no column names we read"))
    return out


@pytest.fixture(scope="module")
def summary(tmp_path_factory):
    return build_panel("Invented panel", _inputs(tmp_path_factory.mktemp("p")))


def _natural(x, ratio):
    return math.exp(x) if ratio else x


def test_one_row_per_outcome_none_dropped(summary):
    assert len(summary.outcomes) == len(SAMPLES) + 3
    status = [o.row["status"] for o in summary.outcomes]
    assert status.count("ok") == len(SAMPLES) + 1
    assert status[-3] == "not analysable" and summary.rows[-3]["reason"].startswith(
        "not analysable:"
    )
    assert status[-1] == "skipped" and "no column names" in summary.rows[-1]["reason"]


def test_rows_equal_the_analysis(summary):
    for o in summary.outcomes:
        if not o.analysable:
            continue
        res = analyse(o.result.review, o.result.settings)  # a fresh run: the reference
        ratio = res.is_ratio
        r = o.row
        assert r["k"] == res.k
        assert r["estimate"] == pytest.approx(_natural(res.random.estimate, ratio), rel=1e-12)
        assert r["ci_low"] == pytest.approx(_natural(res.random.ci.low, ratio), rel=1e-12)
        assert r["ci_high"] == pytest.approx(_natural(res.random.ci.high, ratio), rel=1e-12)
        assert r["i2"] == pytest.approx(res.heterogeneity.i2, abs=1e-12)
        assert r["tau2"] == pytest.approx(res.heterogeneity.tau2, abs=1e-15)
        if res.random.pi is not None:
            assert r["pi_low"] == pytest.approx(_natural(res.random.pi.low, ratio), rel=1e-12)
        assert r["recommended_test"] == res.recommendation.key
        assert r["test_p"] == pytest.approx(res.tests[res.recommendation.key].pvalue, rel=1e-12)
        assert r["rating_suggested"] == appraise(res).rating.suggested
        assert r["fingerprint"] == res.fingerprint
        # the reasons as one line: each reason once, in order, single spaces (the lines
        # under "Signals for publication bias:" are indented on the sheet, not here)
        reasons = appraise(res).rating.reasons
        assert r["reason"] == " ".join(x.strip() for x in reasons)
        assert "  " not in r["reason"]


def test_xlsx_and_csv_read_back(summary, tmp_path):
    import openpyxl

    xlsx = write_panel(summary, tmp_path / "panel.xlsx", date="2026-12-02")
    wb = openpyxl.load_workbook(xlsx)
    ws = wb["outcomes"]
    header = [c.value for c in ws[1]]
    assert header == list(PANEL_COLUMNS)
    for i, row in enumerate(summary.rows, start=2):
        for j, col in enumerate(PANEL_COLUMNS, start=1):
            cell = ws.cell(row=i, column=j)
            want = row[col]
            if want is None:
                assert cell.value is None
            elif isinstance(want, str):
                assert cell.data_type == "s"
                assert cell.value.lstrip("'") == want.lstrip("'") or cell.value == "'" + want
            else:
                assert cell.data_type == "n", (col, cell.value)
                assert cell.value == pytest.approx(want, rel=1e-15)
    # the hostile outcome name is text, not a formula
    names = [ws.cell(row=i, column=1).value for i in range(2, ws.max_row + 1)]
    assert "'" + HOSTILE_NAME in names
    studies = wb["studies"]
    assert [c.value for c in studies[1]] == list(STUDY_COLUMNS)
    n_studies = sum(len(o.result.review.studies) for o in summary.outcomes if o.result)
    assert studies.max_row - 1 == n_studies
    assert "Caution" in " ".join(str(c.value) for c in wb["about"]["A"])

    path = write_panel(summary, tmp_path / "panel.csv")
    with open(path, encoding="utf-8-sig", newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert len(rows) == len(summary.rows)
    for got, want in zip(rows, summary.rows):
        for col in ("k", "estimate", "ci_low", "ci_high", "i2", "test_p"):
            if want[col] is None:
                assert got[col] == ""
            else:
                assert float(got[col]) == pytest.approx(want[col], rel=1e-12)
    assert rows[-2]["outcome"] == "'" + HOSTILE_NAME


def test_docx_table_reads_back(summary, tmp_path):
    from docx import Document

    path = write_panel(summary, tmp_path / "panel.docx", date="2026-12-02")
    doc = Document(str(path))
    (table,) = doc.tables
    assert len(table.rows) == len(summary.rows) + 1
    for row, want in zip(table.rows[1:], summary.rows):
        assert [c.text for c in row.cells] == printed_cells(want)
    text = "\n".join(p.text for p in doc.paragraphs)
    assert "Caution." in text and "does not make clinical or guideline decisions" in text
    # the numbers in the printed cells are the analysis's, rounded as the sheet rounds
    first = summary.rows[0]
    assert f"{abs(first['estimate']):.2f}" in table.rows[1].cells[2].text


def test_pdf_has_every_outcome_and_the_caution(summary, tmp_path):
    from pypdf import PdfReader

    path = write_panel(summary, tmp_path / "panel.pdf", date="2026-12-02")
    text = " ".join(p.extract_text() for p in PdfReader(str(path)).pages)
    flat = " ".join(text.split())
    packed = "".join(text.split())  # table cells wrap long names anywhere
    for o in summary.outcomes:
        assert "".join(o.name.split())[:14] in packed
        if o.analysable:
            assert f"{abs(o.row['estimate']):.2f}" in flat  # printed with a true minus sign
    assert "not analysable" in flat and "skipped" in flat
    assert "Funnel asymmetry is not proof of publication bias" in flat
    assert "Lopside" in flat and "2026-12-02" in flat


def test_wrong_format_and_duplicate_names_refused(summary, tmp_path):
    with pytest.raises(ValueError, match=".pdf, .docx, .xlsx or .csv"):
        write_panel(summary, tmp_path / "panel.pptx")
    review, saved = load_review_file(SAMPLES[0])
    twice = [OutcomeInput("Mortality", review), OutcomeInput("mortality ", review)]
    with pytest.raises(ValueError, match="both called"):
        build_panel("x", twice)


def test_slide_pptx_and_png(tmp_path):
    from pptx import Presentation
    from pptx.util import Inches

    review, saved = load_review_file(SAMPLES[0])
    res = analyse(review, AnalysisSettings.from_dict(saved))
    app = appraise(res)
    pptx = write_slide(res, app, tmp_path / "s.pptx", title="Delirium", date="2026-12-02")
    prs = Presentation(str(pptx))
    assert len(prs.slides) == 1
    assert prs.slide_width == Inches(13.333) and prs.slide_height == Inches(7.5)
    slide = prs.slides[0]
    pictures = [s for s in slide.shapes if s.shape_type == 13]
    assert len(pictures) == 1
    text = " ".join(s.text_frame.text for s in slide.shapes if s.has_text_frame)
    for heading in HEADINGS:
        assert heading in text
    for line in reading_lines(res, app):
        assert line in text
    assert "does not make clinical or guideline decisions" in text
    assert res.fingerprint[:12] in text and "2026-12-02" in text
    png = write_slide(res, app, tmp_path / "s.png", title="Delirium", date="2026-12-02")
    from PIL import Image

    assert Image.open(png).size == (1333, 750)
    with pytest.raises(ValueError, match=".pptx or .png"):
        write_slide(res, app, tmp_path / "s.pdf", title="x")


def _cli(*args):
    return subprocess.run(
        [sys.executable, "-m", "lopside", *args],
        capture_output=True,
        text=True,
        env=dict(os.environ, PYTHONPATH=str(APP)),
        timeout=180,
    )


def test_cli_panel_tables_named_by_file_and_bad_file(tmp_path):
    mortality = tmp_path / "mortality.csv"
    mortality.write_text(
        "study,estimate,lower,upper\nA 2001,0.8,0.6,1.1\nB 2003,0.7,0.5,0.98\nC 2005,0.9,0.7,1.2\n",
        encoding="utf-8",
    )
    bad = tmp_path / "stay.csv"
    bad.write_text("nonsense\n", encoding="utf-8")
    out = tmp_path / "p.csv"
    proc = _cli("panel", str(mortality), str(bad), "--measure", "OR", "-o", str(out))
    assert proc.returncode == 2 and "stay.csv" in proc.stderr and proc.stderr.count("\n") == 1
    assert not out.exists()
    proc = _cli("panel", str(mortality), str(bad), "--measure", "OR", "--skip-bad", "-o", str(out))
    assert proc.returncode == 0, proc.stderr
    with open(out, encoding="utf-8-sig", newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert [r["outcome"] for r in rows] == ["mortality", "stay"]
    assert rows[1]["status"] == "skipped"
    proc = _cli("slide", str(mortality), "--measure", "OR", "-o", str(tmp_path / "s.pptx"))
    assert proc.returncode == 0, proc.stderr
    proc = _cli("slide", str(mortality), "--measure", "OR", "-o", str(tmp_path / "s.doc"))
    assert proc.returncode == 2


def test_cli_panel_of_a_project_is_titled_by_the_project(tmp_path):
    """Without --title the summary of a project carries the review's title (as the
    window's does), not the placeholder; files of different reviews get the placeholder, said once (it
    read 'Panel summary: Panel summary')."""
    import openpyxl

    from lopside.cli import main

    workbook = ROOT / "sample_reviews" / "heart_failure_workbook.lopside"
    title = load_review_file(workbook, outcome="All-cause mortality at 90 days")[0].details.title
    assert title  # the sample has one: the check below can fail
    out = tmp_path / "p.xlsx"
    assert main(["panel", str(workbook), "-o", str(out), "--quiet"]) == 0
    assert openpyxl.load_workbook(out)["about"]["A1"].value == f"Panel summary: {title}"
    mixed = tmp_path / "m.xlsx"
    assert main(["panel", str(SAMPLES[0]), str(SAMPLES[1]), "-o", str(mixed), "--quiet"]) == 0
    assert openpyxl.load_workbook(mixed)["about"]["A1"].value == "Panel summary"


def test_slide_says_why_a_rating_cannot_be_given():
    """The slide said only 'cannot be rated from these data'; a journal club needs the
    reason (too few studies, nothing significant), worded as on the sheet's glance line."""
    from lopside.appraise.rating import CANNOT_RATE, unrated_because
    from lopside.panel.slide import slide_texts

    review, saved = load_review_file(ROOT / "sample_reviews" / "wound_dressings_small.lopside")
    result = analyse(review, AnalysisSettings.from_dict(saved))
    appraisal = appraise(result)
    assert appraisal.rating.suggested == CANNOT_RATE  # 7 studies: the case under test
    why = unrated_because(appraisal.rating)
    assert why.startswith("only 7 studies (at least 10 advised")
    text = slide_texts(result, appraisal, "Invented", "2026-01-01")["rating"]
    assert text == f"Suggested rating of the publication-bias domain: {CANNOT_RATE}: {why}"
