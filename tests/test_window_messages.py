"""Problems and errors in plain words: one message per cause, no exception names, and a
caution beside every asymmetry test run on fewer than 10 studies.

External reference for the threshold: Sterne et al. 2011 (BMJ 343:d4002) advise against
tests for funnel asymmetry with fewer than 10 studies (common practice).
"""

from __future__ import annotations

import pytest

from lopside.analysis import analyse
from lopside.model.review import Review, ReviewDetails, StudyRow
from lopside.settings import AnalysisSettings

pytest.importorskip("PySide6")

from lopside.window import messages as M  # noqa: E402
from lopside.window.errors import details, plain  # noqa: E402
from lopside.window.table_model import problems_by_row  # noqa: E402


def bad_rows_review() -> Review:
    """INVENTED: fictional trials, three of them with one typing mistake each."""
    rows = (
        StudyRow(
            study="Ashdown 2011", int_events=5000, int_total=100, ctl_events=10, ctl_total=100
        ),
        StudyRow(study="Brackley 2013", estimate=0.8, lower=0.9, upper=0.7),
        StudyRow(study="Corfe 2015"),
        StudyRow(study="Dunwich 2016", estimate=0.5, lower=0.3, upper=0.8),
        StudyRow(study="Eyam 2018", estimate=0.6, se=0.2),
    )
    return Review(details=ReviewDetails(title="Invented", measure="OR"), studies=rows)


def test_one_bad_row_gives_one_message():
    review = bad_rows_review()
    result = analyse(review, AnalysisSettings())
    # the core reports each of these rows from two sides (row check and derivation) ...
    raw = [p for p in result.problems if getattr(p, "row", None) == 0]
    derived = result.derived[0].problems
    assert raw and derived
    probs = problems_by_row(result, review.studies)
    for row in (0, 1, 2):
        # ... the window lists one message per cause
        assert len(probs[row]) == 1, [p.message for p in probs[row]]
    counts = probs[0][0]
    assert counts.field == "int_events" and M.LEFT_OUT in counts.message
    assert all(d in counts.detail for d in derived)  # nothing dropped: kept as detail
    assert M.LEFT_OUT not in probs[2][0].message  # "nothing to analyse" says it already
    assert 3 not in probs and 4 not in probs


def test_problem_list_shows_the_merged_message_with_detail(make_window):
    w = make_window(bad_rows_review())
    w.wait_for_analysis()
    items = [w.studies.problems.item(i) for i in range(w.studies.problems.count())]
    assert len(items) == 3
    assert any(it.toolTip() for it in items)


def test_plain_words_strip_file_names_class_names_and_errno():
    msg = (
        "bad.xlsx: the file is not a readable Excel workbook (BadZipFile). Save it again as .xlsx."
    )
    out = plain(msg, "bad.xlsx")
    assert out == "The file is not a readable Excel workbook. Save it again as .xlsx."
    assert plain("ValueError: could not read it") == "Could not read it"
    assert "Errno" not in plain("[Errno 13] Permission denied: '/x/y.lopside'")
    assert "BadZipFile" in details(ValueError("x (BadZipFile)"))


def test_open_error_dialog_is_plain_with_details(make_window, tmp_path):
    bad = tmp_path / "broken.xlsx"
    bad.write_bytes(b"this is not a workbook")
    w = make_window()
    assert not w.open_path(bad, ask=False)
    title, text, detail = w.last_error
    assert text.count("broken.xlsx") == 1  # named once, not twice
    assert "(BadZipFile)" not in text and "Error" not in text
    assert "BadZipFile" in detail or "zip" in detail.lower()
    assert str(bad) in detail


def _small_groups_review() -> Review:
    """INVENTED: two fictional subgroups of five trials each (estimates with CIs)."""
    rows = []
    for i in range(10):
        se = 0.12 + 0.05 * i
        e = 0.7 - 0.02 * i
        rows.append(
            StudyRow(
                study=f"Trial {i + 1}",
                estimate=e,
                lower=round(e * 2.718281828 ** (-1.96 * se), 3),
                upper=round(e * 2.718281828 ** (1.96 * se), 3),
                subgroup="ward" if i % 2 else "clinic",
            )
        )
    return Review(details=ReviewDetails(title="Invented", measure="OR"), studies=tuple(rows))


def test_subgroup_egger_on_few_studies_carries_the_caution(make_window):
    from lopside.summary import SMALL_SAMPLE_MARK, SMALL_SAMPLE_NOTE, subgroups_section

    result = analyse(_small_groups_review(), AnalysisSettings())
    sec = subgroups_section(result)
    egger_cells = [r[4] for r in sec.rows if r[1] and int(r[1]) < 10 and r[4] != "–"]
    assert egger_cells and all(c.endswith(SMALL_SAMPLE_MARK) for c in egger_cells)
    assert SMALL_SAMPLE_NOTE in sec.notes
    # and the window's Pooled view shows it
    w = make_window(_small_groups_review())
    w.views.setCurrentWidget(w.pooled)
    w.refresh_all_views()
    shown = " ".join(w.pooled.plain_text().split())
    assert " ".join(SMALL_SAMPLE_NOTE.split()) in shown


#: width of the right-hand views on a 1366-pixel screen at 100 % (43 % of 1350, less frames)
VIEWS_WIDTH_1366 = 560


def test_summary_panels_do_not_scroll_sideways(qtbot):
    from lopside.window import main_window as MW
    from lopside.window.app import make_application
    from lopside.window.sections import SectionsPanel

    make_application()
    result = analyse(_small_groups_review(), AnalysisSettings())
    for name, build in (
        ("Pooled", MW._pooled_sections),
        ("Tests", MW._tests_sections),
        ("Adjust", MW._adjust_sections),
    ):
        panel = SectionsPanel(name, build)
        qtbot.addWidget(panel)
        panel.resize(VIEWS_WIDTH_1366, 600)
        panel.show()
        qtbot.waitExposed(panel)
        panel.show_result(result)
        qtbot.wait(30)
        assert panel.browser.horizontalScrollBar().maximum() == 0, name
        assert "Studie\ns" not in panel.plain_text()
