"""The window at 1366x768 (100 % and 125 % scaling), by keyboard.

Checked: minimum sizes fit a 1366x768 screen at 125 % (1093x614 logical pixels, less a
task bar and title bar: ENGINEERING-NOTES), a saved geometry is clamped to the available
screen and dropped when the screen or scale changed, the study table needs no sideways
scrolling at 1366 px, mnemonics are unique in every window/tab scope and every focusable
control gets a visible focus frame.
"""

from __future__ import annotations

import pytest

pytest.importorskip("PySide6")
pytest.importorskip("pytestqt")

from PySide6.QtCore import QRect, QSize  # noqa: E402

from lopside.window import prefs as P  # noqa: E402
from lopside.window.screen_fit import (  # noqa: E402
    FRAME_ALLOWANCE,
    default_rect,
    fitted,
    screen_signature,
)
from test_window import invented_review  # noqa: E402

#: logical pixels of a 1366x768 screen at 125 %, less a 40-pixel task bar
SMALL_AVAIL = QRect(0, 0, 1093, 614 - 40)


def test_minimum_size_fits_1366x768_at_125_percent(make_window):
    w = make_window(invented_review())
    for left in range(w.left.count()):
        w.left.setCurrentIndex(left)
        for i in range(w.views.count()):
            w.views.setCurrentIndex(i)
            hint = w.minimumSizeHint().expandedTo(w.minimumSize())
            assert hint.width() + FRAME_ALLOWANCE.width() <= SMALL_AVAIL.width(), (left, i)
            assert hint.height() + FRAME_ALLOWANCE.height() <= SMALL_AVAIL.height(), (left, i)


def test_window_shrinks_to_1093_wide_without_losing_controls(make_window, qtbot):
    w = make_window(invented_review())
    w.resize(1093 - FRAME_ALLOWANCE.width(), 614 - 40 - FRAME_ALLOWANCE.height())
    qtbot.wait(50)
    assert w.width() <= 1093 and w.height() <= 574
    # the right-hand views and the status bar are inside the window
    right = w.views.mapTo(w, w.views.rect().bottomRight())
    assert right.x() <= w.width() and right.y() <= w.height()
    assert w.statusBar().geometry().bottom() <= w.height()
    # the flow layouts wrapped the row buttons instead of pushing them out of view
    for b in w.studies.buttons.values():
        p = b.mapTo(w.studies, b.rect().bottomRight())
        assert p.x() <= w.studies.width(), b.text()


def test_fitted_clamps_a_geometry_saved_on_a_larger_screen():
    saved = QRect(1500, 200, 1800, 1000)  # a big monitor, right of the laptop screen
    fit = fitted(saved, SMALL_AVAIL)
    framed = fit.adjusted(
        -FRAME_ALLOWANCE.width() // 2,
        -(FRAME_ALLOWANCE.height() - FRAME_ALLOWANCE.width() // 2),
        FRAME_ALLOWANCE.width() // 2,
        FRAME_ALLOWANCE.width() // 2,
    )
    assert SMALL_AVAIL.contains(framed), framed
    assert fit.size() == QSize(1093 - 16, 574 - 40)
    inside = QRect(100, 100, 600, 400)
    assert fitted(inside, SMALL_AVAIL) == inside  # a geometry that fits is kept


def test_default_rect_fits_small_and_keeps_1366_on_a_big_screen():
    small = default_rect(SMALL_AVAIL)
    assert small.width() <= 1093 - 16 and small.height() <= 574 - 40
    big = default_rect(QRect(0, 0, 1920, 1040))
    assert big.size() == QSize(1366, 740)


def _built(qtbot):
    """A window as the application builds it (placed by the saved preferences, not shown)."""
    from lopside.window.app import make_application
    from lopside.window.main_window import MainWindow

    make_application()
    w = MainWindow(autosave=False, ask_save_changes=lambda name: "discard")
    qtbot.addWidget(w)
    return w


def test_saved_geometry_from_another_screen_or_scale_is_not_reused(qtbot, user_state):
    w = _built(qtbot)
    sig = screen_signature(w.screen())
    assert sig and "@" in sig
    w.setGeometry(40, 60, 700, 500)
    w._save_prefs()
    # same screen and scale: the geometry comes back
    w2 = _built(qtbot)
    assert w2.prefs.get_str(P.SCREEN) == sig
    assert (w2.width(), w2.height()) == (700, 500)
    # saved at another scale (or on another screen): the default, fitted to this screen
    w2.prefs.set(P.SCREEN, sig.replace("@", "@9"))
    w2.prefs.sync()
    w3 = _built(qtbot)
    avail = w3.screen().availableGeometry()
    assert (w3.width(), w3.height()) != (700, 500)
    assert w3.width() <= avail.width() and w3.height() <= avail.height()


def test_restored_geometry_off_the_screen_is_pulled_back(qtbot, user_state):
    w = _built(qtbot)
    avail = w.screen().availableGeometry()
    w.setGeometry(avail.right() + 300, avail.bottom() + 300, 4000, 3000)
    w._save_prefs()
    w2 = _built(qtbot)
    assert avail.contains(w2.geometry()), (w2.geometry(), avail)
    assert w2.width() < 4000


# ------------------------------------------------------------------ the study table


#: width of the Studies tab on a 1366-pixel screen at 100 % with the default split
#: (57 % of a 1350-pixel window, less the tab frame)
STUDIES_WIDTH_1366 = 760


def test_table_needs_no_sideways_scroll_at_1366(qtbot):
    from lopside.analysis import analyse
    from lopside.session import Session
    from lopside.window.app import make_application
    from lopside.window.study_panel import StudyPanel
    from lopside.window.undo import EditStack

    make_application()
    review = invented_review()
    session = Session(review)
    panel = StudyPanel(session, EditStack(session))
    qtbot.addWidget(panel)
    panel.resize(STUDIES_WIDTH_1366, 600)
    panel.show()
    qtbot.waitExposed(panel)
    panel.show_result(analyse(review, session.settings))
    for mode in ("counts", "ci", "se", "p"):
        panel.set_mode(mode)
        qtbot.wait(20)
        bar = panel.table.horizontalScrollBar()
        assert bar.maximum() == 0, mode
        if mode == "counts":  # the default mode for this table: nothing elided
            fm = panel.table.fontMetrics()
            m = panel.model
            for key in ("study", "subgroup", "risk_of_bias"):
                c = m.column_of(key)
                longest = max(fm.horizontalAdvance(getattr(r, key)) for r in review.studies)
                assert panel.table.columnWidth(c) >= longest, key


def test_long_names_are_elided_in_the_middle_with_a_tooltip(make_window):
    from PySide6.QtCore import Qt

    from lopside import edits as ed

    w = make_window(invented_review())
    long = "Nakamura-Ellis and Westerberg-Oduya multicentre extension 2014"
    w.stack.push_edit(ed.SetCell(0, "study", long))
    w.wait_for_analysis()
    from PySide6.QtWidgets import QStyleOptionViewItem

    t = w.studies.table
    m = w.studies.model
    idx = m.index(0, m.column_of("study"))
    option = QStyleOptionViewItem()
    option.textElideMode = t.textElideMode()
    t.itemDelegateForIndex(idx).initStyleOption(option, idx)
    assert option.textElideMode == Qt.ElideMiddle
    assert m.data(idx, Qt.ToolTipRole) == long
    assert t.columnWidth(m.column_of("study")) < t.fontMetrics().horizontalAdvance(long)


def test_long_numbers_lose_their_end_not_their_middle(make_window):
    """A full-precision number from a spreadsheet showed as '0.56…2289', which reads as
    another number; it keeps its leading digits ('0.5628…') and its full text is the
    tooltip. Names still lose their middle (their year stays)."""
    from PySide6.QtCore import Qt
    from PySide6.QtWidgets import QStyleOptionViewItem

    from lopside import edits as ed
    from lopside.model.review import Review, ReviewDetails, StudyRow

    rows = tuple(  # INVENTED: odds ratios with their standard errors
        StudyRow(study=f"Invented {i} 20{10 + i}", estimate=0.5 + i / 10, se=0.2 + i / 20)
        for i in range(6)
    )
    w = make_window(Review(details=ReviewDetails(measure="OR"), studies=rows))
    w.wait_for_analysis()
    field, value = "estimate", "0.5628372289"
    w.stack.push_edit(ed.SetCell(0, field, value))
    w.wait_for_analysis()
    t, m = w.studies.table, w.studies.model
    number, name = m.index(0, m.column_of(field)), m.index(0, m.column_of("study"))
    assert m.data(number, Qt.ToolTipRole) == value
    for idx, mode in ((number, Qt.ElideRight), (name, Qt.ElideMiddle)):
        delegate = t.itemDelegateForIndex(idx)
        option = QStyleOptionViewItem()
        option.textElideMode = t.textElideMode()  # what the view hands every cell
        delegate.initStyleOption(option, idx)
        assert option.textElideMode == mode
    shown = t.fontMetrics().elidedText(value, Qt.ElideRight, 60)
    assert shown.startswith(value[:3]) and shown.endswith("\u2026")  # the leading digits


def test_problems_box_is_one_line_when_empty(make_window):
    from lopside import edits as ed

    w = make_window(invented_review())
    s = w.studies
    assert not s.problems.isVisible()
    assert "none found" in s.problems_title.text()
    w.stack.push_edit(ed.SetCell(0, "int_events", "5000"))  # more events than patients
    w.wait_for_analysis()
    assert s.problems.isVisible() and s.problems.count() >= 1
    assert s.problems.height() <= 6 + 4 * 40


def test_question_field_is_multi_line_and_round_trips(make_window, qtbot):
    from PySide6.QtWidgets import QPlainTextEdit

    w = make_window(invented_review())
    q = w.details.question
    assert isinstance(q, QPlainTextEdit)
    text = (
        "In adults over 65 having major surgery, does zelparin given before the operation "
        "reduce falls in hospital compared with placebo?"
    )
    from PySide6.QtCore import Qt

    w._show_left(1)
    q.setPlainText(text[:-1])
    q.moveCursor(q.textCursor().MoveOperation.End)
    qtbot.keyClicks(q, text[-1])
    assert w.session.review.details.question != text  # typing alone does not commit
    qtbot.keyClick(q, Qt.Key_Return)  # Enter finishes the field (no line break)
    assert "\n" not in q.toPlainText()
    qtbot.waitUntil(lambda: w.session.review.details.question == text, timeout=2000)
    assert q.height() >= 2 * q.fontMetrics().lineSpacing()


# ------------------------------------------------------------------ keyboard


def _mnemonic(text: str) -> str:
    """The letter after a single '&' ("" when none; '&&' is a literal ampersand)."""
    i = 0
    while i < len(text) - 1:
        if text[i] == "&":
            if text[i + 1] == "&":
                i += 2
                continue
            return text[i + 1].lower()
        i += 1
    return ""


def _widget_mnemonics(root) -> list[tuple[str, str]]:
    """(letter, where) for every control under ``root`` a mnemonic can reach."""
    from PySide6.QtWidgets import QAbstractButton, QGroupBox, QLabel, QTabWidget

    out = []
    for wdg in [root, *root.findChildren(object)]:
        if not hasattr(wdg, "isVisibleTo") or (wdg is not root and not wdg.isVisibleTo(root)):
            continue
        text = ""
        if isinstance(wdg, QAbstractButton):
            text = wdg.text()
        elif isinstance(wdg, QLabel) and wdg.buddy() is not None:
            text = wdg.text()
        elif isinstance(wdg, QGroupBox):
            text = wdg.title()
        elif isinstance(wdg, QTabWidget) and wdg is not root:
            text = " ".join(wdg.tabText(i) for i in range(wdg.count()))
        letter = _mnemonic(text)
        if letter:
            out.append((letter, f"{type(wdg).__name__} {text!r}"))
    return out


def test_mnemonics_are_unique_in_every_window_and_tab_scope(make_window):
    w = make_window(invented_review())
    menus = [(_mnemonic(a.text()), f"menu {a.text()!r}") for a in w.menuBar().actions()]
    assert {m for m, _ in menus} >= {"f", "e", "v", "h"}  # Alt+F is the File menu
    tabs = [(_mnemonic(w.left.tabText(i)), f"tab {w.left.tabText(i)!r}") for i in range(2)]
    tabs += [
        (_mnemonic(w.views.tabText(i)), f"tab {w.views.tabText(i)!r}")
        for i in range(w.views.count())
    ]
    clashes = []
    checked = 0
    for li in range(w.left.count()):
        w.left.setCurrentIndex(li)
        for vi in range(w.views.count()):
            w.views.setCurrentIndex(vi)
            w.refresh_all_views()
            scope = [(m, s) for m, s in menus + tabs if m]
            scope += _widget_mnemonics(w.left.widget(li))
            scope += _widget_mnemonics(w.outcomes)  # the outcome chooser above them
            scope += _widget_mnemonics(w.views.widget(vi))
            seen: dict[str, str] = {}
            for letter, where in scope:
                if letter in seen:
                    clashes.append(f"Alt+{letter.upper()}: {seen[letter]} and {where}")
                seen[letter] = where
            checked += len(scope)
    assert checked > 100  # the walk really visited the controls
    assert clashes == [], "\n".join(sorted(set(clashes)))
    # every menu's own entries are unique too
    from PySide6.QtWidgets import QMenu

    for menu in w.menuBar().findChildren(QMenu):
        letters = [_mnemonic(a.text()) for a in menu.actions() if not a.isSeparator()]
        letters = [x for x in letters if x]
        assert len(letters) == len(set(letters)), menu.title()


def test_every_focusable_control_gets_the_visible_focus_frame(make_window, qtbot):
    from PySide6.QtCore import Qt
    from PySide6.QtWidgets import QApplication, QFocusFrame, QWidget

    from lopside.window.focus import FOCUS_RULE, FOCUS_WIDTH_PX, wants_frame

    w = make_window(invented_review())
    w.activateWindow()
    assert "border" in FOCUS_RULE and FOCUS_WIDTH_PX >= 2
    frame = w.focus_tracker.frame
    assert isinstance(frame, QFocusFrame) and FOCUS_RULE in frame.styleSheet()
    controls = 0
    for li in range(w.left.count()):
        w.left.setCurrentIndex(li)
        for vi in range(w.views.count()):
            w.views.setCurrentIndex(vi)
            w.refresh_all_views()
            for c in w.findChildren(QWidget):
                if not (c.isVisible() and c.focusPolicy() & Qt.TabFocus) or c is frame:
                    continue
                assert wants_frame(c)
                c.setFocus(Qt.TabFocusReason)
                QApplication.processEvents()
                if QApplication.focusWidget() is not c:
                    w.focus_tracker.follow(c)  # offscreen focus can lag: place it directly
                assert frame.widget() is c, type(c).__name__
                assert frame.isVisible()
                controls += 1
    assert controls > 40
