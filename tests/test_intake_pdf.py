"""Rows read from a review's PDF equal the same rows pasted as text.

The PDFs are made here with reportlab (tests/pdf_makers.py) from invented tables, in two
fonts and every layout the reader claims to handle; the ground truth is the text of the
rows as printed, read by the paste reader. For each layout the rows must come back with
the printed values exactly, and y and SE (lopside.stats.effects.derive) equal to those of
the pasted rows.
"""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest

import pdf_makers as M
from lopside.intake.paste import read_pasted
from lopside.intake.pdf import (
    NO_TEXT_LAYER,
    PdfError,
    choose_pages,
    parse_pages,
    read_pdf,
    render_page,
    rows_from_pages,
)
from lopside.stats.effects import derive

APP = Path(__file__).resolve().parents[1] / "app"

LAYOUTS = {
    "single column, OR (95% CI)": (M.single_column_or, "OR", None),
    "two-column journal page": (M.two_column_page, "OR", None),
    "estimate, lower, upper in columns": (M.separate_limits, "OR", None),
    "events/total per arm": (M.arm_counts, "OR", None),
    "mean, SD, n per arm": (M.means_sds, "MD", None),
    "table printed sideways": (M.sideways_table, "OR", None),
    "landscape page": (M.landscape_page, "OR", None),
    "forest plot drawn as vectors": (M.forest_figure, "OR", None),
    "unicode minus, mid-dots, en dashes, marks": (M.typographic, "MD", None),
    "table continued on the next page": (M.continued_table, "OR", "1-2"),
}

FIELDS = (
    "study",
    "year",
    "estimate",
    "lower",
    "upper",
    "int_events",
    "int_total",
    "ctl_events",
    "ctl_total",
    "int_mean",
    "int_sd",
    "int_n",
    "ctl_mean",
    "ctl_sd",
    "ctl_n",
)


@pytest.mark.parametrize("font", M.FONTS)
@pytest.mark.parametrize("layout", list(LAYOUTS))
def test_every_row_is_recovered_as_printed(layout, font, tmp_path):
    maker, measure, page_spec = LAYOUTS[layout]
    pdf = tmp_path / "review.pdf"
    truth_lines = maker(pdf, font)
    truth = read_pasted("\n".join(truth_lines), measure)
    assert len(truth.rows) == len(truth_lines)  # the ground truth itself reads fully

    doc = read_pdf(pdf)
    pages, _ = choose_pages(doc, page_spec)
    got = rows_from_pages(doc, pages, measure)
    assert len(got.paste.rows) == len(truth.rows)
    for a, b in zip(got.paste.rows, truth.rows):
        for f in FIELDS:
            assert getattr(a, f) == getattr(b, f), (layout, font, f)
        da, db = derive(a, measure), derive(b, measure)
        assert da.y == db.y and da.se == db.se
        assert da.y is not None
    # every rebuilt line is accounted for: a study, skipped or not understood, with its page
    kept = [line for n in pages for line in next(p for p in doc.pages if p.number == n).lines]
    assert len(got.paste.lines) == len(kept)
    assert len(got.line_pages) == len(kept)
    for r in got.paste.lines:
        assert r.status in ("study", "skipped", "not understood")
        if r.status != "study":
            assert r.reason
    # each row knows its page
    assert {got.page_of_row(i) for i in range(len(got.paste.rows))} <= set(pages)


def test_footnote_marks_are_left_out_and_said(tmp_path):
    pdf = tmp_path / "marks.pdf"
    M.typographic(pdf)
    doc = read_pdf(pdf)
    got = rows_from_pages(doc, [1], "MD")
    assert sum("footnote mark" in n for n in got.notes) == 3


def test_sideways_table_either_way_round(tmp_path):
    """Turned a quarter turn clockwise as well as anticlockwise."""
    from reportlab.lib.pagesizes import A4
    from reportlab.pdfgen import canvas

    pdf = tmp_path / "cw.pdf"
    c = canvas.Canvas(str(pdf), pagesize=A4)
    c.translate(300, 700)
    c.rotate(-90)
    y = -20
    for lab, est, lo, hi, _, _ in M.TRIALS:
        c.setFont("Helvetica", 9)
        c.drawString(0, y, f"{lab} {est} ({lo} to {hi})")
        y -= 15
    c.showPage()
    c.save()
    doc = read_pdf(pdf)
    assert doc.pages[0].orientation == "sideways"
    got = rows_from_pages(doc, [1], "OR")
    assert [r.study for r in got.paste.rows] == [t[0] for t in M.TRIALS]


def test_candidate_pages_best_first_and_others_named(tmp_path):
    pdf = tmp_path / "long.pdf"
    M.many_pages(pdf, n=12, table_page=9)
    doc = read_pdf(pdf)
    pages, notes = choose_pages(doc, None)
    assert pages == [9]
    assert "page 9" in notes[0]
    assert doc.ranked()[0].number == 9


def test_progress_and_cancel(tmp_path):
    pdf = tmp_path / "long.pdf"
    M.many_pages(pdf, n=10, table_page=2)
    seen = []

    def progress(done, total):
        seen.append((done, total))
        return done < 3

    doc = read_pdf(pdf, progress=progress)
    assert doc.cancelled
    assert [p.number for p in doc.pages] == [1, 2, 3]
    assert seen == [(1, 10), (2, 10), (3, 10)]


@pytest.mark.parametrize(
    ("make", "expected"),
    [
        (M.encrypted, "protected by a password"),
        (M.image_only, NO_TEXT_LAYER),
        (lambda p: p.write_bytes(b"%PDF-1.4\n1 0 obj<<>>\n"), "damaged or cut short"),
        (lambda p: p.write_text("not a pdf at all", encoding="utf-8"), "not a PDF file"),
    ],
)
def test_bad_pdfs_are_one_sentence(make, expected, tmp_path):
    pdf = tmp_path / "bad.pdf"
    make(pdf)
    with pytest.raises(PdfError) as info:
        choose_pages(read_pdf(pdf), None)
    assert expected in str(info.value)
    assert str(info.value).startswith("bad.pdf: ")


def test_truncated_pdf_is_refused(tmp_path):
    good = tmp_path / "good.pdf"
    M.single_column_or(good)
    cut = tmp_path / "cut.pdf"
    cut.write_bytes(good.read_bytes()[: len(good.read_bytes()) // 3])
    with pytest.raises(PdfError, match="damaged or cut short"):
        choose_pages(read_pdf(cut), None)


def test_page_numbers():
    assert parse_pages("7") == [7]
    assert parse_pages("7-9") == [7, 8, 9]
    assert parse_pages("7, 9") == [7, 9]
    for bad in ("", "x", "0", "9-7", "7--8", "-3"):
        with pytest.raises(ValueError):
            parse_pages(bad)


def test_render_page_for_preview(tmp_path):
    pdf = tmp_path / "r.pdf"
    M.single_column_or(pdf)
    img = render_page(pdf, 1, scale=0.5)
    # A4 is 595 x 842 points
    assert abs(img.size[0] - 298) <= 1 and abs(img.size[1] - 421) <= 1


def _cli(*args):
    return subprocess.run(
        [sys.executable, "-m", "lopside", *args],
        capture_output=True,
        text=True,
        env=dict(os.environ, PYTHONPATH=str(APP)),
        timeout=120,
    )


def test_cli_reads_the_best_page_and_says_so(tmp_path):
    pdf = tmp_path / "review.pdf"
    M.continued_table(pdf)
    proc = _cli("check", str(pdf), "--measure", "OR", "--json")
    assert proc.returncode == 0, proc.stderr
    assert "rows read from page 1 (5 study rows)" in proc.stderr
    assert "other pages that also hold study rows: 2" in proc.stderr
    proc2 = _cli("check", str(pdf), "--measure", "OR", "--json", "--page", "1-2")
    assert proc2.returncode == 0, proc2.stderr
    import json

    assert json.loads(proc2.stdout)["k"] == 8
    assert json.loads(proc.stdout)["k"] == 5


def test_cli_bad_pdf_exits_2_in_one_line(tmp_path):
    pdf = tmp_path / "locked.pdf"
    M.encrypted(pdf)
    proc = _cli("check", str(pdf))
    assert proc.returncode == 2
    assert proc.stderr.count("\n") == 1
    assert "password" in proc.stderr and "Traceback" not in proc.stderr
    proc = _cli("check", str(pdf), "--page", "x")
    assert proc.returncode == 2 and "page numbers" in proc.stderr
