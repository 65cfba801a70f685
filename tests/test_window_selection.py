"""The Adjust view's sensitivity to selection (issue 20), driven as a user would (offscreen).

What the window shows is compared with the summary's wording of a fresh core analysis; the
window computes nothing of its own. Invented data (fictional trials).
"""

from __future__ import annotations

import pytest

pytest.importorskip("PySide6")
pytest.importorskip("pytestqt")

from lopside import summary as S  # noqa: E402
from lopside.analysis import analyse  # noqa: E402
from lopside.model.review import Review, ReviewDetails, StudyRow  # noqa: E402

COUNTS = [
    (40, 600, 52, 598), (31, 410, 40, 405), (22, 300, 30, 302), (18, 220, 25, 221),
    (12, 160, 20, 158), (9, 120, 16, 121), (6, 90, 13, 88), (5, 70, 11, 72),
    (3, 50, 9, 51), (2, 40, 8, 40), (1, 30, 7, 31), (1, 25, 6, 24),
]  # fmt: skip


def invented_review() -> Review:
    """INVENTED: a fictional drug, twelve fictional trials, two never reported."""
    rows = [
        StudyRow(study=f"Invented trial {i}", int_events=a, int_total=n1, ctl_events=c,
                 ctl_total=n0)
        for i, (a, n1, c, n0) in enumerate(COUNTS, start=1)
    ]  # fmt: skip
    rows += [
        StudyRow(study="Invented registered 1", int_total=200, ctl_total=200, reported=False),
        StudyRow(study="Invented registered 2", n=350, reported=False),
    ]
    return Review(details=ReviewDetails(title="Invented review", measure="OR"), studies=tuple(rows))


def _wait(w, qtbot):
    qtbot.waitUntil(
        lambda: (
            w.result is not None
            and w.result.review is w.session.review
            and w.result.settings is w.session.settings
        ),
        timeout=5000,
    )


def test_adjust_view_shows_sentences_curve_and_a_typed_eta(make_window, qtbot, tmp_path):
    w = make_window(invented_review())
    _wait(w, qtbot)
    w.views.setCurrentWidget(w.adjust)
    fresh = analyse(w.session.review, w.session.settings)
    text = " ".join(w.adjust.plain_text().split())
    assert " ".join(S.selection_sentence(fresh).split()) in text
    assert " ".join(S.missing_trials_sentence(fresh).split()) in text
    assert "How strong would selection have to be?" in text
    # the curve is in the document as an image
    assert "<img src='lopside-selection-curve.png'>" in w.adjust.html
    assert not w.adjust.curve_error

    # one more η typed by the user: the settings change and the table gains the row
    w.adjust.eta_edit.setText("3")
    w.adjust.eta_edit.editingFinished.emit()
    assert w.session.settings.selection_eta == 3.0
    _wait(w, qtbot)
    # the full stage reaches the view shown (the staged window redraws it when it lands)
    qtbot.waitUntil(lambda: "η = 3" in w.adjust.plain_text(), timeout=10000)
    c = w.result.selection_sensitivity.random.at(3.0)
    assert S.fmt_effect_ci(c.estimate, c.ci_low, c.ci_high, "OR") in w.adjust.plain_text()

    # a value that is not a selection ratio is kept in the field, said, and not applied
    w.adjust.eta_edit.setText("0.5")
    w.adjust.eta_edit.editingFinished.emit()
    assert w.session.settings.selection_eta == 3.0
    assert "0.5" in w.adjust.eta_feedback.text()

    w.grab().save(str(tmp_path / "adjust.png"))
    assert (tmp_path / "adjust.png").stat().st_size > 10_000


def test_reported_column_in_the_window_table(make_window, qtbot):
    from PySide6.QtCore import Qt

    w = make_window(invented_review())
    _wait(w, qtbot)
    m = w.studies.model
    col = m.column_of("reported")
    assert col >= 0
    assert m.data(m.index(12, col), Qt.DisplayRole) == "no"
    assert m.data(m.index(0, col), Qt.DisplayRole) == ""
    assert m.setData(m.index(0, col), "no", Qt.EditRole)
    assert w.session.review.studies[0].reported is False
