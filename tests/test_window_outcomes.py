"""The window on a workbook of outcomes (issue 18): chooser, Outcome menu, Panel view,
panel and slide exports, and that saving and autosave keep every outcome.

The numbers shown are the core's (checked in test_workbook.py and test_panel.py); here
the window is checked to show the outcome chosen, to undo outcome edits, and to write
files that read back with every outcome. Data: the invented sample workbook.
"""

from __future__ import annotations

import csv
from pathlib import Path

import pytest

from lopside.model import project_file as pf

pytestmark = pytest.mark.usefixtures("user_state")

ROOT = Path(__file__).resolve().parents[1]
WORKBOOK = ROOT / "sample_reviews" / "heart_failure_workbook.lopside"


@pytest.fixture
def book_window(make_window, tmp_path):
    copy = tmp_path / "hf.lopside"
    copy.write_bytes(WORKBOOK.read_bytes())
    names = iter(["Length of stay", "Hospital stay"])
    w = make_window(None)
    w.outcomes.ask_name = lambda title, label, text: next(names)
    assert w.open_path(copy)
    w.wait_for_analysis()
    return w, copy


def test_opening_a_workbook_shows_its_outcomes(book_window):
    w, _ = book_window
    bar = w.outcomes
    assert bar.chooser.count() == 5 and bar.count.text() == "of 5"
    assert bar.chooser.itemText(0) == "1. All-cause mortality at 90 days"
    w.update_views()
    assert w.result.k == 18 and w.result.review.measure == "OR"
    bar.choose(2)  # the walk test: another measure, another table
    w.wait_for_analysis()
    w.update_views()
    assert w.result.review.measure == "MD" and w.result.k == 11
    assert w.studies.model.rowCount() == 11
    assert w.details.outcome.text() == "Six-minute walk distance at 90 days"
    assert not w.session.dirty  # choosing is not an edit


def test_outcome_menu_edits_undo_and_save_every_outcome(book_window, tmp_path):
    w, path = book_window
    bar = w.outcomes
    assert bar.add()  # "Length of stay"
    assert w.session.outcome_names[-1] == "Length of stay" and w.session.outcome_index == 5
    assert bar.copy_studies_from(0)
    assert len(w.session.review.studies) == 18
    assert w.session.review.studies[0].estimate is None  # names, not another outcome's numbers
    assert bar.rename()  # "Hospital stay"
    assert bar.move(-1)
    assert w.session.outcome_names[4] == "Hospital stay"
    bar.choose(0)
    assert bar.delete()
    assert len(w.session.outcome_names) == 5 and "All-cause" not in w.session.outcome_names[0]
    w.stack.undo()  # the deleted outcome is back, and shown
    assert w.session.outcome_names[0] == "All-cause mortality at 90 days"
    assert w.session.outcome_index == 0
    assert w.save()
    back = pf.load_workbook(path)
    assert back.names == w.session.outcome_names and len(back) == 6
    # renaming to a taken name is refused with the reason, nothing changes
    w.outcomes.ask_name = lambda *a: "serious adverse EVENTS"
    bar.choose(1)
    assert not bar.rename()
    assert "already called" in w.last_message
    assert pf.load_workbook(path).names == back.names


def test_details_form_rename_keeps_names_unique(book_window):
    from lopside import edits as ed

    w, _ = book_window
    assert not w.stack.push_edit(ed.SetDetail("outcome", "Serious adverse events"))
    assert w.session.outcome_names[0] == "All-cause mortality at 90 days"
    assert w.stack.push_edit(ed.SetDetail("outcome", "Death at 90 days"))
    assert w.outcomes.chooser.itemText(0) == "1. Death at 90 days"


def test_panel_view_lists_every_outcome_and_opens_one(book_window):
    w, _ = book_window
    w._show_view(w.view_panels.index(w.panel_view))
    w.panel_view.wait()
    t = w.panel_view.table
    assert t.rowCount() == 5
    texts = [t.item(r, 1).text() for r in range(5)]
    assert texts[0].startswith("All-cause mortality at 90 days\n18 studies")
    assert all(t.item(r, 0).data(0x1) is not None for r in range(5))  # a funnel in each row
    t.sortItems(2)  # by the small-study test's p: the smallest first
    assert t.item(0, 1).text().startswith("All-cause mortality")
    wanted = int(t.item(4, 0).data(0x0100))  # Qt.UserRole: the outcome's place
    w.panel_view._clicked(4, 1)
    assert w.views.currentWidget() is w.funnel
    assert w.session.outcome_index == wanted
    # the rows do not depend on the outcome shown: kept, not made again
    assert t.rowCount() == 5


def test_panel_and_slide_exports_from_the_window(book_window, tmp_path):
    w, _ = book_window
    out = w.export_panel(str(tmp_path / "panel.csv"))
    assert out is not None
    with open(out, encoding="utf-8-sig", newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert [r["outcome"] for r in rows] == list(w.session.outcome_names)
    docx = w.export_panel(str(tmp_path / "panel.docx"))
    from docx import Document

    cells = [c.text for row in Document(docx).tables[0].rows for c in row.cells]
    assert "Quality of life at 90 days" in cells
    w.outcomes.choose(3)
    w.wait_for_analysis()
    slide = w.export_slide(str(tmp_path / "slide.pptx"))
    from pptx import Presentation

    text = " ".join(
        sh.text_frame.text for sh in Presentation(slide).slides[0].shapes if sh.has_text_frame
    )
    assert "Quality of life at 90 days" in text
    # never over the workbook being appraised
    assert w.export_panel(str(w.session.path.with_suffix(".lopside"))) is None


def test_autosave_keeps_every_outcome(book_window):
    w, _ = book_window
    w.outcomes.add()
    assert w.autosaver is not None and w.autosaver.save_now()
    assert len(pf.load_workbook(w.autosaver.file)) == 6


def test_outcomes_added_from_files_are_one_undo_step(book_window, tmp_path):
    w, _ = book_window
    table = tmp_path / "length_of_stay.csv"
    table.write_text("study,md,lower,upper\nA 2001,-1.2,-2.0,-0.4\nB 2003,-0.6,-1.5,0.3\n", "utf-8")
    assert w.add_outcomes_from_file(table)
    assert w.session.outcome_names[-1] == "length_of_stay"
    assert w.session.review.measure == "MD" and len(w.session.review.studies) == 2
    # a whole workbook: each of its outcomes, names kept unique
    assert w.add_outcomes_from_file(WORKBOOK)
    names = w.session.outcome_names
    assert len(names) == 11 and names[6] == "All-cause mortality at 90 days (2)"
    w.stack.undo()
    assert len(w.session.outcome_names) == 6
    assert not w.add_outcomes_from_file(tmp_path / "review.pdf")
    assert "Paste rows from a paper" in w.last_message


def test_a_slide_of_an_outcome_without_studies_says_why(book_window, tmp_path):
    w, _ = book_window
    w.outcomes.ask_name = lambda *a: "Empty outcome"
    assert w.outcomes.add()
    assert w.export_slide(str(tmp_path / "e.pptx")) is None
    assert w.last_message.startswith("The slide could not be written:")
    assert not (tmp_path / "e.pptx").exists()


def test_closing_while_the_panel_is_being_made_stops_its_worker(book_window, monkeypatch):
    """Closing the window while the Panel view was analysing the outcomes left its thread
    running; when Python then freed it, Qt aborted the program ('QThread: Destroyed while
    thread is still running', exit 134; seen with a slow analysis on 2026-12-03)."""
    import time

    from lopside import analysis

    real = analysis._full_stage

    def slow(*args, **kwargs):
        time.sleep(0.5)  # each outcome's full stage: five outcomes, 2.5 s in all
        return real(*args, **kwargs)

    w, _ = book_window
    monkeypatch.setattr(analysis, "_full_stage", slow)
    w._show_view(w.view_panels.index(w.panel_view))
    worker = w.panel_view.worker
    assert worker is not None and worker.isRunning()  # the case under test
    started = time.monotonic()
    w._closing_ok = True
    w.close()
    assert not worker.isRunning()  # stopped and waited for, not left to be destroyed
    assert time.monotonic() - started < 2.0  # stopped at its next stage, not run to the end
