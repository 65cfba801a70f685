"""The desktop window, driven as a user would (pytest-qt, offscreen).

What is checked against outside the window: the numbers it shows are compared with a fresh
call of the core ``analyse()`` on the same review (the window must compute nothing of its
own), saved files with ``project_file.load``, the PDF with pypdf.
"""

from __future__ import annotations

import os
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

pytest.importorskip("PySide6")
pytest.importorskip("pytestqt")

from PySide6.QtCore import QPoint, Qt  # noqa: E402

from lopside import edits as ed  # noqa: E402
from lopside.analysis import analyse  # noqa: E402
from lopside.model import project_file  # noqa: E402
from lopside.model.review import CauseNote, Review, ReviewDetails, StudyRow  # noqa: E402

APP = Path(__file__).resolve().parents[1] / "app"

#: INVENTED forest-table text (fictional trials), with a header, a total line and one
#: line that cannot be read, as a user would copy it from a PDF.
FOREST_TEXT = (
    "Study or subgroup\tZelparin Events Total\tPlacebo Events Total\t"
    "Odds Ratio M-H, Random, 95% CI\n"
    "Okafor 2009   12/140   20/138   0.58 (0.27 to 1.24)\n"
    "Brandt 2011   5/60   11/62   0.42 (0.14 to 1.29)\n"
    "Castell 2014   30/300   41/296   0.69 (0.42 to 1.14)\n"
    "Dupr\u00e9 2016   3/35   9/36   0.28 (0.07 to 1.14)\n"
    "Ferreira 2018   8/90   12/91   0.64 (0.25 to 1.65)\n"
    "this line is nonsense 12\n"
    "Total (95% CI)   58/625   93/623   0.60 (0.43 to 0.85)\n"
)


def invented_review():
    """INVENTED data for the window tests: a fictional drug ("zelparin"), twelve
    fictional trials with 2x2 counts, smaller trials showing larger benefit."""
    from lopside.model.review import Review, ReviewDetails, StudyRow

    counts = [
        (40, 600, 52, 598),
        (31, 410, 40, 405),
        (22, 300, 30, 302),
        (18, 220, 25, 221),
        (12, 160, 20, 158),
        (9, 120, 16, 121),
        (6, 90, 13, 88),
        (5, 70, 11, 72),
        (3, 50, 9, 51),
        (2, 40, 8, 40),
        (2, 30, 7, 31),
        (1, 24, 6, 25),
    ]
    rows = []
    for i, (a, n1, c, n0) in enumerate(counts):
        rows.append(
            StudyRow(
                study=f"Trial {chr(65 + i)} {2001 + i}",
                year=2001 + i,
                int_events=a,
                int_total=n1,
                ctl_events=c,
                ctl_total=n0,
                risk_of_bias="low" if n1 >= 150 else "high",
                subgroup="ward" if i % 2 else "clinic",
            )
        )
    return Review(
        details=ReviewDetails(
            title="Zelparin for falls in hospital (INVENTED test data)",
            measure="OR",
            source_note="Invented for tests: fictional drug and trials.",
        ),
        studies=tuple(rows),
    )


def ci_review() -> Review:
    """INVENTED: eight fictional trials entered as odds ratios with 95% CIs."""
    ors = [
        (0.80, 0.62, 1.03),
        (0.75, 0.55, 1.02),
        (0.70, 0.47, 1.04),
        (0.62, 0.38, 1.01),
        (0.55, 0.30, 1.01),
        (0.50, 0.24, 1.04),
        (0.45, 0.19, 1.07),
        (0.40, 0.15, 1.09),
    ]
    rows = tuple(
        StudyRow(study=f"Study {i + 1}", estimate=e, lower=lo, upper=hi)
        for i, (e, lo, hi) in enumerate(ors)
    )
    return Review(details=ReviewDetails(title="Invented CI review", measure="OR"), studies=rows)


def _fresh(window):
    """The core's own analysis of what the window holds (no cache)."""
    return analyse(window.session.review, window.session.settings)


def _index(window, row, field):
    m = window.studies.model
    return m.index(row, m.column_of(field))


# ------------------------------------------------------------------ paste


def test_paste_preview_insert_funnel_and_one_undo(make_window, qtbot):
    w = make_window()
    dlg = w.open_paste_dialog(FOREST_TEXT)
    # the preview lists every non-blank line, with the unreadable one marked
    assert dlg.preview.rowCount() == 8
    statuses = [dlg.preview.item(i, 1).text() for i in range(dlg.preview.rowCount())]
    assert statuses.count("study") == 5
    assert "not understood" in statuses
    assert dlg.ok_button.isEnabled() and "5" in dlg.ok_button.text()
    qtbot.mouseClick(dlg.ok_button, Qt.LeftButton)
    assert not dlg.isVisible()
    studies = w.session.review.studies
    assert [s.study for s in studies] == [
        "Okafor 2009",
        "Brandt 2011",
        "Castell 2014",
        "Dupr\u00e9 2016",
        "Ferreira 2018",
    ]
    assert (studies[0].int_events, studies[0].int_total) == (12, 140)
    assert w.studies.model.rowCount() == 5
    # the published result on the Total line came along in the same step
    assert w.session.review.details.published.estimate == pytest.approx(0.60)
    w.update_views()
    w.views.setCurrentWidget(w.funnel)
    w.funnel.draw_now()
    assert w.funnel.showing_figure()
    assert len(w.funnel.points()) == 5 == w.result.k
    # one undo removes the whole paste
    assert w.stack.count() == 1
    w.stack.undo()
    assert w.session.review.studies == ()
    assert w.studies.model.rowCount() == 0
    assert w.session.review.details.published.estimate is None
    w.stack.redo()
    assert len(w.session.review.studies) == 5


# ------------------------------------------------------------------ editing


def test_editing_a_cell_updates_the_pooled_result_to_the_core_value(make_window, qtbot):
    from lopside.summary import pooled_text

    w = make_window(ci_review())
    assert w.studies.model.mode == "ci"
    before = w.result.random.estimate
    assert w.studies.model.setData(_index(w, 0, "estimate"), "0.9", Qt.EditRole)
    qtbot.waitUntil(
        lambda: w.result is not None and w.result.review is w.session.review, timeout=2000
    )
    fresh = _fresh(w)
    assert w.result.random.estimate == fresh.random.estimate != before
    assert w.result.fixed.estimate == fresh.fixed.estimate
    # what the user reads is the summary's wording of the core value
    assert pooled_text(fresh.random, "OR") in w.status_label.text()
    w.views.setCurrentWidget(w.pooled)
    assert pooled_text(fresh.random, "OR").split(" ")[0] in w.pooled.plain_text()
    # the derived column shows the core's derived y for the edited row
    shown = w.studies.model.data(_index(w, 0, "_y"), Qt.DisplayRole)
    assert float(shown) == pytest.approx(fresh.derived[0].y, rel=1e-3)


def test_an_invalid_entry_shows_its_problem_and_keeps_the_text(make_window, qtbot):
    from lopside.window.table_model import ERROR_CELL

    w = make_window(ci_review())
    idx = _index(w, 2, "lower")
    assert w.studies.model.setData(idx, "0,47 to", Qt.EditRole)
    w.update_views()
    row = w.session.review.studies[2]
    assert row.lower is None and row.unread_dict() == {"lower": "0,47 to"}
    m = w.studies.model
    assert m.data(idx, Qt.DisplayRole) == "0,47 to"  # nothing typed is discarded
    assert m.data(idx, Qt.BackgroundRole).color() == ERROR_CELL
    assert "0,47 to" in m.data(idx, Qt.ToolTipRole)
    items = [w.studies.problems.item(i).text() for i in range(w.studies.problems.count())]
    assert any("Row 3" in t and "lower" in t for t in items), items
    # fixing it clears the problem
    m.setData(idx, "0.47", Qt.EditRole)
    w.update_views()
    assert (
        m.data(idx, Qt.BackgroundRole) is None
        or m.data(idx, Qt.BackgroundRole).color() != ERROR_CELL
    )


def test_typing_in_one_cell_is_one_undo_step(make_window):
    w = make_window(ci_review())
    m = w.studies.model
    idx = _index(w, 1, "estimate")
    for text in ("0.7", "0.71", "0.715"):
        m.setData(idx, text, Qt.EditRole)
    assert w.stack.count() == 1
    w.stack.undo()
    assert w.session.review.studies[1].estimate == 0.75


def test_rows_add_duplicate_move_exclude_delete(make_window):
    w = make_window(ci_review())
    s = w.studies
    s.select_row(0)
    s.duplicate_rows()
    assert len(w.session.review.studies) == 9
    s.select_row(0)
    s.move_current(+1)
    assert w.session.review.studies[1].study == "Study 1"
    s.select_row(3)
    s.toggle_exclude()
    assert w.session.review.studies[3].exclude
    w.update_views()
    assert w.result.k == 8  # excluded but kept in the table
    assert len(w.session.review.studies) == 9
    s.select_row(3)
    s.delete_rows()
    assert len(w.session.review.studies) == 8
    for _ in range(4):
        w.stack.undo()
    assert w.session.review == ci_review()


def test_changing_the_measure_rederives_every_row(make_window):
    w = make_window(invented_review())
    y_or = [d.y for d in w.result.derived]
    w.details.measure.setCurrentIndex(w.details.measure.findData("RR"))
    w.details.measure.activated.emit(w.details.measure.currentIndex())
    w.update_views()
    assert w.session.review.measure == "RR"
    fresh = _fresh(w)
    assert [d.y for d in w.result.derived] == [d.y for d in fresh.derived]
    assert [d.y for d in fresh.derived] != y_or


def test_funnel_click_selects_the_row_and_the_row_selects_the_point(make_window, qtbot):
    w = make_window(invented_review())
    w.views.setCurrentWidget(w.funnel)
    w.funnel.draw_now()
    canvas = w.funnel.canvas
    target = w.session.review.studies.index(w.session.review.studies[4])
    px, py = w.funnel.display_point_of_row(target)
    ratio = canvas.devicePixelRatioF()
    pos = QPoint(int(px / ratio), int(canvas.height() - py / ratio))
    with qtbot.waitSignal(w.funnel.point_clicked, timeout=2000) as sig:
        qtbot.mouseClick(canvas, Qt.LeftButton, pos=pos)
    assert sig.args == [target]
    assert w.studies.table.currentIndex().row() == target
    assert w.funnel.selected_rows == (target,)
    assert "Trial E" in w.funnel.describe_row(target)


# ------------------------------------------------------------------ files


def test_save_close_reopen_gives_the_same_review_and_notes(make_window, tmp_path):
    target = tmp_path / "zelparin.lopside"
    w = make_window(invented_review(), ask_save_path=lambda *a: str(target))
    w.studies.model.setData(_index(w, 0, "study"), "Trial A (renamed) 2001", Qt.EditRole)
    c = w.causes
    c.judgement["methods"].setCurrentIndex(c.judgement["methods"].findData("likely"))
    c.notes["methods"].setPlainText("Small trials were open label.")
    c.flush()
    assert w.session.review.notes.cause("methods") == CauseNote(
        "likely", "Small trials were open label."
    )
    assert w.save()
    assert not w.session.dirty and not w.isWindowModified()
    saved = w.session.review
    w.close()
    loaded, _settings = project_file.load(target)
    assert loaded == saved
    w2 = make_window()
    assert w2.open_path(target)
    assert w2.session.review == saved
    assert w2.causes.notes["methods"].toPlainText() == "Small trials were open label."
    assert str(target.resolve()) in w2.prefs.recent_files()


def test_closing_with_unsaved_changes_asks_first(make_window):
    asked = []
    w = make_window(ci_review(), ask_save_changes=lambda name: asked.append(name) or "cancel")
    w.stack.push_edit(ed.SetCell(0, "estimate", "0.9"))
    w.close()
    assert asked and w.isVisible()  # "cancel" keeps the window open


CRASH_SCRIPT = textwrap.dedent(
    """
    import os, sys
    sys.path.insert(0, {app!r})
    from lopside.model import project_file
    from lopside.session import Session
    from lopside.window.app import make_application
    from lopside.window.main_window import MainWindow
    from lopside import edits as ed
    app = make_application()
    review, _ = project_file.load({src!r})
    w = MainWindow(Session(review, path={src!r}), ask_recover=lambda items: None)
    w.show()
    w.stack.push_edit(ed.SetCell(0, "study", "Edited before the crash"))
    w.stack.push_edit(ed.SetCauseNote("chance", ed.CauseNote("possible", "few trials")))
    assert w.autosaver.save_now()
    os._exit(3)  # no clean exit: the lock and the autosave stay behind
    """
)


def test_recovery_after_a_crash_restores_the_edits(make_window, user_state, tmp_path):
    src = tmp_path / "before.lopside"
    project_file.save(invented_review(), src)
    env = dict(os.environ, QT_QPA_PLATFORM="offscreen")
    script = CRASH_SCRIPT.format(app=str(APP), src=str(src))
    proc = subprocess.run(
        [sys.executable, "-c", script], env=env, capture_output=True, text=True, timeout=120
    )
    assert proc.returncode == 3, proc.stderr
    left = sorted(p.suffix for p in user_state["autosave"].iterdir())
    assert left == [".json", ".lock", ".lopside"]
    offered = []

    def accept(items):
        offered.extend(items)
        return items[0]

    w = make_window(ask_recover=accept)
    assert len(offered) == 1 and offered[0].name == "before.lopside"
    assert w.session.review.studies[0].study == "Edited before the crash"
    assert w.session.review.notes.cause("chance") == CauseNote("possible", "few trials")
    assert w.session.dirty and w.session.path == src
    # the crashed run's files are gone; only this window's own autosave remains
    assert not any(
        str(p).endswith(f"{offered[0].review_file.stem}.lopside")
        for p in user_state["autosave"].iterdir()
    )


def test_no_recovery_offer_after_a_clean_exit(make_window):
    offered = []
    w = make_window(ci_review(), ask_recover=lambda items: offered.append(items))
    w.stack.push_edit(ed.SetCell(0, "estimate", "0.9"))
    assert w.autosaver.save_now()
    w._closing_ok = True
    w.close()
    make_window(ask_recover=lambda items: offered.append(items))
    assert offered == []


def test_open_a_sample_review_and_a_csv(make_window):
    from lopside.paths import sample_reviews

    w = make_window()
    samples = sample_reviews()
    assert samples, "no sample reviews installed"
    lop = next(p for p in samples if p.suffix == ".lopside")
    assert w.open_path(lop, remember=False)
    assert (
        w.result is not None
        and w.result.k == len([s for s in w.session.review.studies if not s.exclude])
        or w.result.k > 0
    )
    csv = next((p for p in samples if p.suffix == ".csv"), None)
    if csv is not None:
        assert w.open_path(csv)
        assert w.session.path is None and w.session.imported_from == csv


# ------------------------------------------------------------------ exports and power


def test_export_the_sheet_gives_a_valid_pdf(make_window, tmp_path, qtbot):
    try:
        import lopside.sheet  # noqa: F401
    except ImportError as exc:
        pytest.skip(f"the sheet package is not in the tree: {exc}")
    pypdf = pytest.importorskip("pypdf")
    opened = []
    w = make_window(
        invented_review(),
        ask_open_sheet=lambda path: True,
        open_url=lambda url: opened.append(url.toLocalFile()),
    )
    out = tmp_path / "sheet.pdf"
    worker = w.export_sheet(str(out))
    assert worker is not None
    with qtbot.waitSignal(worker.finished_with, timeout=60000):
        pass
    reader = pypdf.PdfReader(str(out))
    assert 1 <= len(reader.pages) <= 3
    text = "".join(p.extract_text() for p in reader.pages)
    assert "Zelparin" in text
    assert opened == [str(out)]


def test_figure_export_and_clipboard(make_window, tmp_path):
    w = make_window(invented_review())
    for suffix, magic in ((".png", b"\x89PNG"), (".svg", b"<?xml"), (".pdf", b"%PDF")):
        p = tmp_path / f"funnel{suffix}"
        assert w.export_figure(str(p))
        assert p.read_bytes().startswith(magic)
    assert w.copy_funnel()
    from PySide6.QtGui import QGuiApplication

    assert not QGuiApplication.clipboard().image().isNull()


def test_power_runs_in_a_worker_and_can_be_cancelled(make_window, qtbot):
    w = make_window(invented_review())
    w.session.update_settings(power_reps=400_000)  # long enough to cancel part-way
    panel = w.power
    worker = panel.make_worker()
    assert not worker.isRunning()
    seen = []
    worker.progress.connect(lambda d, t: seen.append((d, t)))
    with qtbot.waitSignal(worker.finished_with, timeout=60000) as sig:
        panel.start(worker)
        assert worker.isRunning()
        qtbot.waitUntil(lambda: bool(seen), timeout=30000)
        panel.cancel_button.click()
    power, _key = sig.args
    assert getattr(power, "reason", "").lower().startswith("cancel")
    assert seen and seen[-1][0] < seen[-1][1]
    qtbot.waitUntil(lambda: panel.state.text() == "Power simulation cancelled.", timeout=5000)
    assert panel.run_button.isEnabled() and not panel.cancel_button.isEnabled()
    assert not w.session.power_is_current()


def test_power_result_is_kept_and_shown(make_window, qtbot):
    w = make_window(invented_review())
    w.session.update_settings(power_reps=2000)
    w.views.setCurrentWidget(w.power)
    worker = w.power.make_worker()
    with qtbot.waitSignal(worker.finished_with, timeout=60000):
        w.power.start(worker)
    qtbot.waitUntil(lambda: w.session.power_is_current(), timeout=5000)
    w.update_views()
    assert w.result.power is not None and not hasattr(w.result.power, "reason")
    from lopside.summary import power_section
    from lopside.window import messages as WM

    text = w.power.sections.plain_text()
    assert WM.POWER_NOT_RUN not in text
    for label, value in power_section(w.result).rows:  # what the summary says is shown
        assert label in text and value.split("\n")[0][:40] in text


# ------------------------------------------------------------------ preferences and help


def test_options_and_geometry_are_remembered(make_window):
    w = make_window(invented_review())
    w.funnel.egger_box.setChecked(True)
    w.funnel.axis_box.setCurrentIndex(w.funnel.axis_box.findData("precision"))
    w.studies.set_mode("all")
    w._closing_ok = True
    w.close()
    w2 = make_window()
    assert w2.funnel.option_state()["egger_line"] is True
    assert w2.funnel.option_state()["axis"] == "precision"
    assert w2.studies.model.mode == "all"


def test_about_carries_the_caution_and_the_guide_loads():
    from lopside import CAUTION
    from lopside.window.help import about_html, guide_text

    assert CAUTION in about_html()
    assert "funnel" in guide_text().lower()


def test_the_window_fits_1366_by_768(make_window):
    w = make_window(invented_review())
    w.resize(1366, 740)
    assert w.width() <= 1366 and w.height() <= 768
    assert w.minimumSizeHint().width() <= 1366
    assert w.minimumSizeHint().height() <= 740


def test_print_the_funnel_to_a_pdf_printer(make_window, tmp_path):
    from PySide6.QtPrintSupport import QPrinter

    w = make_window(invented_review())
    printer = QPrinter(QPrinter.HighResolution)
    printer.setOutputFormat(QPrinter.PdfFormat)
    out = tmp_path / "printed.pdf"
    printer.setOutputFileName(str(out))
    assert w.print_funnel(printer)
    assert out.read_bytes().startswith(b"%PDF")


def test_dropping_a_file_opens_it(make_window, qtbot, tmp_path):
    from PySide6.QtCore import QMimeData, QPointF, QUrl
    from PySide6.QtGui import QDropEvent

    path = tmp_path / "dropped.lopside"
    project_file.save(ci_review(), path)
    w = make_window()
    mime = QMimeData()
    mime.setUrls([QUrl.fromLocalFile(str(path))])
    event = QDropEvent(QPointF(50, 50), Qt.CopyAction, mime, Qt.LeftButton, Qt.NoModifier)
    w.dropEvent(event)
    qtbot.waitUntil(lambda: w.session.path == path, timeout=5000)
    assert w.session.review == ci_review()
    w._fill_recent()
    assert any("dropped.lopside" in a.text() for a in w.recent_menu.actions())


def test_dropping_several_files_opens_the_first_and_names_the_rest(make_window, qtbot, tmp_path):
    """Only the first file of a drop was opened; the others were ignored without a word."""
    from PySide6.QtCore import QMimeData, QPointF, QUrl
    from PySide6.QtGui import QDropEvent

    first = tmp_path / "first.lopside"
    project_file.save(ci_review(), first)
    table = tmp_path / "second.csv"
    table.write_text("study,estimate,se\nA,0.8,0.2\n", encoding="utf-8")
    notes = tmp_path / "notes.docx"
    notes.write_bytes(b"not a review")
    w = make_window()
    mime = QMimeData()
    mime.setUrls([QUrl.fromLocalFile(str(p)) for p in (first, table, notes)])
    event = QDropEvent(QPointF(50, 50), Qt.CopyAction, mime, Qt.LeftButton, Qt.NoModifier)
    w.dropEvent(event)
    qtbot.waitUntil(lambda: w.session.path == first, timeout=5000)
    qtbot.waitUntil(lambda: "Not opened" in w.last_message, timeout=5000)
    assert "second.csv" in w.last_message and "notes.docx" in w.last_message
    assert "first.lopside" in w.last_message


def test_every_control_has_an_accessible_name_or_a_label(make_window):
    from PySide6.QtWidgets import (
        QAbstractButton,
        QAbstractSpinBox,
        QComboBox,
        QLabel,
        QLineEdit,
        QPlainTextEdit,
        QTableView,
    )

    w = make_window(invented_review())
    buddies = {lab.buddy() for lab in w.findChildren(QLabel) if lab.buddy() is not None}
    unnamed = []
    for cls in (
        QComboBox,
        QLineEdit,
        QPlainTextEdit,
        QAbstractSpinBox,
        QTableView,
        QAbstractButton,
    ):
        for c in w.findChildren(cls):
            if isinstance(c, QLineEdit) and isinstance(c.parent(), (QComboBox, QAbstractSpinBox)):
                continue  # the editor inside a combo/spin box is named by its owner
            if c.objectName().startswith("qt_"):
                continue  # Qt's own parts (table corner button, menu-bar overflow)
            text = c.text() if isinstance(c, QAbstractButton) else ""
            if not (c.accessibleName() or text.strip() or c in buddies):
                unnamed.append(f"{type(c).__name__} {c.objectName()}")
    assert unnamed == []


def test_standard_shortcuts_are_set():
    from PySide6.QtGui import QKeySequence

    assert QKeySequence(QKeySequence.Undo).toString()  # the platform has a binding
    import inspect

    from lopside.window import main_window

    src = inspect.getsource(main_window.MainWindow._build_menus)
    for seq in (
        "QKeySequence.New",
        "QKeySequence.Open",
        "QKeySequence.Save",
        "QKeySequence.SaveAs",
        "QKeySequence.Undo",
        "QKeySequence.Redo",
        "QKeySequence.Print",
        "QKeySequence.Quit",
        "QKeySequence.HelpContents",
    ):
        assert seq in src


def test_hovering_a_point_names_the_study(make_window):
    w = make_window(invented_review())
    w.views.setCurrentWidget(w.funnel)
    w.funnel.draw_now()
    row = 2
    px, py = w.funnel.display_point_of_row(row)
    assert w.funnel.row_at(px, py) == row
    assert w.funnel.row_at(px + 40, py + 40) != row or w.funnel.row_at(px + 40, py + 40) is None
    text = w.funnel.describe_row(row)
    assert text.startswith("Trial C 2003") and "SE" in text


def test_typing_into_the_table_with_the_keyboard_only(make_window, qtbot):
    from PySide6.QtWidgets import QLineEdit

    w = make_window(ci_review())
    table = w.studies.table
    with qtbot.waitActive(w):  # keyboard events need the active window (ENGINEERING-NOTES)
        w.activateWindow()
    table.setFocus()
    w.studies.select_row(1, col=w.studies.model.column_of("estimate"))

    def editor():
        e = table.viewport().findChild(QLineEdit)
        return e if e is not None and e.isVisible() else None

    def type_into_current_cell(text, check):
        qtbot.keyClicks(table, text[0])  # any key starts editing the current cell
        # wait for the editor to open and take the focus (no fixed sleep: CI may be loaded)
        qtbot.waitUntil(lambda: editor() is not None, timeout=5000)
        qtbot.keyClicks(editor(), text[1:])  # the editor has the focus from here on
        assert editor().text() == text
        qtbot.keyClick(editor(), Qt.Key_Return)
        qtbot.waitUntil(check, timeout=5000)  # Qt commits the editor's data from a queued call

    type_into_current_cell("0.66", lambda: w.session.review.studies[1].estimate == 0.66)
    # Tab moves to the next cell; typing replaces its value
    qtbot.keyClick(table, Qt.Key_Tab)
    assert table.currentIndex().column() == w.studies.model.column_of("lower")
    type_into_current_cell("0.4", lambda: w.session.review.studies[1].lower == 0.4)
    assert w.stack.count() == 2


def test_ctrl_v_of_one_value_fills_the_current_cell(make_window):
    from PySide6.QtGui import QGuiApplication

    w = make_window(ci_review())
    QGuiApplication.clipboard().setText("0,52")
    w.studies.select_row(4, col=w.studies.model.column_of("estimate"))
    w.paste_clipboard()
    assert w.session.review.studies[4].estimate == 0.52
    QGuiApplication.clipboard().setText(FOREST_TEXT)
    w.paste_clipboard()
    assert w.paste_dialog.isVisible() and len(w.paste_dialog.rows()) == 5
    w.paste_dialog.reject()


def test_delete_key_blanks_the_selected_cells_in_one_step(make_window, qtbot):
    w = make_window(ci_review())
    table = w.studies.table
    m = w.studies.model
    from PySide6.QtCore import QItemSelection, QItemSelectionModel

    sel = QItemSelection(m.index(0, m.column_of("lower")), m.index(2, m.column_of("upper")))
    table.selectionModel().select(sel, QItemSelectionModel.ClearAndSelect)
    qtbot.keyClick(table, Qt.Key_Delete)
    assert all(r.lower is None and r.upper is None for r in w.session.review.studies[:3])
    assert w.session.review.studies[0].estimate == 0.80  # outside the selection: kept
    assert w.stack.count() == 1
    w.stack.undo()
    assert w.session.review == ci_review()


def test_autosave_follows_a_change_and_goes_when_nothing_is_unsaved(make_window, qtbot):
    w = make_window(ci_review())
    saver = w.autosaver
    assert saver.timer.interval() == 3000  # "a few seconds after a change"
    saver.timer.setInterval(100)  # the same path, sooner
    w.stack.push_edit(ed.SetCell(0, "study", "Typed, not saved"))
    qtbot.waitUntil(saver.file.exists, timeout=5000)
    kept, _ = project_file.load(saver.file)
    assert kept.studies[0].study == "Typed, not saved"
    w.stack.undo()  # back to the state that was opened: nothing unsaved
    qtbot.waitUntil(lambda: not saver.file.exists(), timeout=5000)


def test_a_table_of_estimates_asks_which_measure(make_window, tmp_path):
    csv = tmp_path / "estimates.csv"
    csv.write_text(
        "study,estimate,lower,upper\nA 2001,0.8,0.6,1.1\nB 2003,0.7,0.5,0.98\n", encoding="utf-8"
    )
    asked = []
    w = make_window(ask_measure=lambda name: asked.append(name) or "HR")
    assert w.open_path(csv)
    assert asked == ["estimates.csv"]
    assert w.session.review.measure == "HR" and len(w.session.review.studies) == 2
    assert w.studies.model.mode == "ci"


def test_a_damaged_project_is_reported_not_raised(make_window, tmp_path):
    bad = tmp_path / "damaged.lopside"
    bad.write_text('{"lopside_project": 1, "studies": [', encoding="utf-8")
    w = make_window(ci_review())
    before = w.session.review
    assert not w.open_path(bad, ask=False)
    assert "damaged.lopside" in w.last_message and "damaged or incomplete" in w.last_message
    assert w.session.review is before  # the review on screen is untouched


def test_new_review_after_asking(make_window):
    answers = []
    w = make_window(ci_review(), ask_save_changes=lambda name: answers.append(name) or "discard")
    w.stack.push_edit(ed.SetCell(0, "study", "changed"))
    w.new_review()
    assert answers and w.session.review == Review()
    assert w.stack.count() == 0 and w.studies.model.rowCount() == 0
    w.update_views()
    assert w.result.k == 0
    assert w.funnel.message.text() and not w.funnel.showing_figure()  # says why, no plot


def test_preferences_read_back_from_disk_keep_their_types(user_state, tmp_path):
    """QSettings read from disk returns a one-item list as text and True as 'true' unless
    type= is given (ENGINEERING-NOTES); the wrapper must hand back the right types."""
    script = textwrap.dedent(
        f"""
        import sys
        sys.path.insert(0, {str(APP)!r})
        from PySide6.QtCore import QCoreApplication
        app = QCoreApplication([])
        from lopside.window.prefs import Prefs
        p = Prefs()
        p.add_recent({str(tmp_path / "only.lopside")!r})
        p.set("funnel/egger_line", True)
        p.set("window/view_tab", 3)
        p.sync()
        """
    )
    env = dict(os.environ, QT_QPA_PLATFORM="offscreen")
    proc = subprocess.run(
        [sys.executable, "-c", script], env=env, capture_output=True, text=True, timeout=60
    )
    assert proc.returncode == 0, proc.stderr
    from lopside.window.prefs import Prefs

    p = Prefs()
    assert p.recent_files() == [str((tmp_path / "only.lopside").resolve())]
    assert p.get_bool("funnel/egger_line") is True
    assert p.get_int("window/view_tab") == 3


def test_figure_exports_of_an_empty_review_say_why(make_window, tmp_path):
    """Export, copy and print of a review with no usable study returned without a word."""
    from lopside.window import messages as M

    w = make_window()  # a new, empty review
    w.wait_for_analysis()
    w.say("")
    assert w.export_figure(str(tmp_path / "f.png")) is False
    # it said "The appraisal sheet could not be written: ..." for a figure
    assert w.last_message.startswith("The figure could not be written: ")
    assert "needs at least one study" in w.last_message
    assert not (tmp_path / "f.png").exists()
    w.say("")
    assert w.copy_funnel() is False
    assert w.last_message  # copy said why too
    assert w.last_message != M.NOTHING_TO_EXPORT.format(why="")
