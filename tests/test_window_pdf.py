"""Opening a review's PDF in the window: pages, boxed rows, ticks, a region, then the paste
preview and the table (pytest-qt, offscreen). The PDFs are made by tests/pdf_makers.py from
invented tables; the rows must reach the table exactly as the same rows pasted as text."""

from __future__ import annotations

import pytest

pytest.importorskip("PySide6")
pytest.importorskip("pytestqt")

from PySide6.QtCore import QRectF, Qt  # noqa: E402

import pdf_makers as M  # noqa: E402
from lopside.intake.paste import read_pasted  # noqa: E402
from lopside.intake.pdf import read_pdf  # noqa: E402


def _dialog(qtbot, path):
    from lopside.window.app import make_application
    from lopside.window.pdf_dialog import PdfDialog

    make_application()
    dlg = PdfDialog(str(path), None, doc=read_pdf(path))
    qtbot.addWidget(dlg)
    dlg.show()
    return dlg


def test_pages_ranked_and_every_line_listed(qtbot, tmp_path):
    pdf = tmp_path / "long.pdf"
    M.many_pages(pdf, n=6, table_page=4)
    dlg = _dialog(qtbot, pdf)
    assert dlg.pages.item(0).data(Qt.UserRole) == 4
    assert "8 study rows" in dlg.pages.item(0).text()
    assert dlg.selected_pages() == [4]
    assert dlg.lines.count() == len(dlg.doc.pages[3].lines)
    assert dlg.ok_button.isEnabled()
    assert read_pasted(dlg.chosen_text()).rows == read_pasted("\n".join(M.ci_lines())).rows


def test_unticking_and_region_leave_rows_out(qtbot, tmp_path):
    pdf = tmp_path / "two.pdf"
    M.two_column_page(pdf)
    dlg = _dialog(qtbot, pdf)
    assert len(dlg.reading().paste.rows) == 8
    # untick the line of the first trial
    for i in range(dlg.lines.count()):
        item = dlg.lines.item(i)
        if "Abelard" in item.text():
            item.setCheckState(Qt.Unchecked)
            break
    assert len(dlg.reading().paste.rows) == 7
    assert "Abelard" not in dlg.chosen_text()
    # a region around the right-hand column keeps only the table (prose is left out)
    page = dlg.doc.pages[0]
    s = 1.4
    dlg._region_drawn(QRectF(300 * s, 0, (page.width - 300) * s, 200 * s))
    text = dlg.chosen_text()
    assert "invented trials below" not in text
    assert len(dlg.reading().paste.rows) == 7
    dlg._clear_region()
    assert "invented trials below" in dlg.chosen_text()


def test_pages_of_a_table_that_runs_on(qtbot, tmp_path):
    pdf = tmp_path / "cont.pdf"
    M.continued_table(pdf)
    dlg = _dialog(qtbot, pdf)
    for i in range(dlg.pages.count()):
        dlg.pages.item(i).setSelected(True)
    assert dlg.selected_pages() == [1, 2]
    assert len(dlg.reading().paste.rows) == 8
    assert (
        dlg.reading()
        .source_note("cont.pdf")
        .startswith("Rows 1-5 read from page 1 and rows 6-8 from page 2 of cont.pdf")
    )


def test_open_pdf_in_window_reaches_the_table(make_window, qtbot, tmp_path):
    pdf = tmp_path / "review.pdf"
    truth = read_pasted("\n".join(M.arm_counts(pdf))).rows
    w = make_window()
    worker = w.open_path(str(pdf), ask=False)
    qtbot.waitUntil(lambda: getattr(w, "pdf_dialog", None) is not None, timeout=20000)
    worker.wait()
    dlg = w.pdf_dialog
    assert len(dlg.reading().paste.rows) == 8
    dlg.accept()
    qtbot.waitUntil(lambda: getattr(w, "paste_dialog", None) is not None, timeout=5000)
    paste = w.paste_dialog
    paste.read_now()
    paste.accept()
    assert w.session.review.studies == truth
    assert "8 rows from page(s) 1 of review.pdf" in w.last_message
    assert w.session.review.details.source_note.startswith("Rows read from page 1 of review.pdf")
    # the intake account names the PDF's page, not "pasted text" (issue 19)
    intake = w.session.review.intake
    assert intake.source == "page 1 of review.pdf"
    assert [p.split(", line")[0] for _, p in intake.rows_at] == ["page 1 of review.pdf"] * 8


def test_bad_pdf_in_window_is_a_message(make_window, qtbot, tmp_path):
    pdf = tmp_path / "locked.pdf"
    M.encrypted(pdf)
    w = make_window()
    worker = w.open_path(str(pdf), ask=False)
    worker.wait()
    qtbot.waitUntil(lambda: "password" in (w.last_message or ""), timeout=10000)
    assert getattr(w, "pdf_dialog", None) is None
