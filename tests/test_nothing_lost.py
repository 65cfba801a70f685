"""Nothing the user made is lost or changed without being asked (issue 13, issue 22 items
3, 4, 6, 7), driven through the window as a user would (pytest-qt, offscreen).

The two-window crash runs two real Lopside windows in subprocesses and kills both with
SIGKILL (like a power cut or "End task": no clean-up runs), then starts a third.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest

pytest.importorskip("PySide6")
pytest.importorskip("pytestqt")

from PySide6.QtCore import QPoint, QPointF, QSysInfo, Qt, QTimer  # noqa: E402
from PySide6.QtGui import QWheelEvent  # noqa: E402
from PySide6.QtWidgets import (  # noqa: E402
    QAbstractButton,
    QAbstractSpinBox,
    QApplication,
    QComboBox,
    QLabel,
    QLineEdit,
    QPlainTextEdit,
    QTextEdit,
    QWidget,
)

from lopside import edits as ed  # noqa: E402
from lopside.model import project_file  # noqa: E402
from lopside.model.review import Review  # noqa: E402
from lopside.window import autosave as AS  # noqa: E402
from lopside.window import messages as M  # noqa: E402
from test_window import ci_review, invented_review  # noqa: E402

APP = Path(__file__).resolve().parents[1] / "app"


@pytest.fixture
def reports(monkeypatch):
    """The error-report dialog replaced by a list (summary, report, log path)."""
    from lopside.window import guards

    shown: list[tuple[str, str, str]] = []
    monkeypatch.setattr(guards, "show_report", lambda s, r, log: shown.append((s, r, log)))
    return shown


# ------------------------------------------------------------------ case 2: two windows crash

CHILD = textwrap.dedent(
    """
    import sys, time
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
    w.stack.push_edit(ed.SetCell(0, "study", {edit!r}))
    # the window's own timer writes the autosave (a few seconds after the first change)
    while not w.autosaver.file.exists():
        app.processEvents()
        time.sleep(0.05)
    print("autosaved", flush=True)
    while True:  # an ordinary running window until it is killed
        app.processEvents()
        time.sleep(0.05)
    """
)


def _crash_two_windows(tmp_path) -> list[Path]:
    """Two real windows, each with an unsaved edit, both killed with SIGKILL."""
    sources = []
    procs = []
    env = dict(os.environ, QT_QPA_PLATFORM="offscreen")
    for name, review, edit in (
        ("falls.lopside", invented_review(), "Edited in window one"),
        ("ci.lopside", ci_review(), "Edited in window two"),
    ):
        src = tmp_path / name
        project_file.save(review, src)
        sources.append(src)
        script = CHILD.format(app=str(APP), src=str(src), edit=edit)
        procs.append(
            subprocess.Popen(
                [sys.executable, "-c", script],
                env=env,
                stdout=subprocess.PIPE,
                stderr=subprocess.PIPE,
                text=True,
            )
        )
    try:
        for p in procs:
            line = p.stdout.readline()
            assert line.strip() == "autosaved", p.stderr.read()
    finally:
        for p in procs:
            os.kill(p.pid, signal.SIGKILL)
            p.wait(timeout=60)
    assert all(p.returncode == -signal.SIGKILL for p in procs)
    return sources


@pytest.mark.skipif(not hasattr(signal, "SIGKILL"), reason="needs SIGKILL")
def test_two_windows_killed_both_offered_both_restored(make_window, user_state, tmp_path):
    falls, ci = _crash_two_windows(tmp_path)
    folder = user_state["autosave"]
    assert len(list(folder.glob("*.lopside"))) == 2
    offered = []

    def restore_all(items):
        offered.extend(items)
        return list(items)

    w = make_window(ask_recover=restore_all)
    try:
        # every autosave is listed, with title, file, time and number of studies
        assert sorted(Path(r.original).name for r in offered) == ["ci.lopside", "falls.lopside"]
        by_file = {Path(r.original).name: r for r in offered}
        assert by_file["falls.lopside"].studies == 12 and by_file["ci.lopside"].studies == 8
        assert by_file["falls.lopside"].title == invented_review().details.title
        assert all(r.saved_at > time.time() - 600 for r in offered)
        # one review in this window, the other in a window of its own
        assert len(w.spawned) == 1
        windows = [w, *w.spawned]
        firsts = sorted(x.session.review.studies[0].study for x in windows)
        assert firsts == ["Edited in window one", "Edited in window two"]
        assert all(x.session.dirty for x in windows)
        assert sorted(x.session.path.name for x in windows) == ["ci.lopside", "falls.lopside"]
        # the crashed runs' autosaves are gone; each window's own now holds the work
        left = sorted(p.stem for p in folder.glob("*.lopside"))
        assert left == sorted(x.autosaver.stem for x in windows)
    finally:
        for x in w.spawned:
            x._closing_ok = True
            x.close()


@pytest.mark.skipif(not hasattr(signal, "SIGKILL"), reason="needs SIGKILL")
def test_deciding_later_and_a_failed_recovery_keep_every_autosave(
    make_window, user_state, tmp_path
):
    _crash_two_windows(tmp_path)
    folder = user_state["autosave"]
    before = sorted(p.name for p in folder.glob("*.lopside"))
    # "Decide later": nothing restored, nothing deleted
    make_window(ask_recover=lambda items: None)
    assert sorted(p.name for p in folder.glob("*.lopside")) == before
    # a recovery that fails keeps its autosave and says where it is
    damaged = folder / before[0]
    damaged.write_text('{"lopside_project": 1, "studies": [', encoding="utf-8")
    offered = []
    w = make_window(
        ask_recover=lambda items: (
            offered.extend(items) or [r for r in items if r.review_file == damaged]
        )
    )
    assert len(offered) == 2  # still both offered
    assert damaged.exists()
    assert str(damaged) in w.last_message and "Could not recover" in w.last_message
    assert w.spawned == [] or all(not x.isVisible() for x in w.spawned)
    # the other one was not chosen: kept for the next start
    assert (folder / before[1]).exists()


def test_only_discarded_autosaves_are_deleted(make_window, user_state, tmp_path):
    folder = user_state["autosave"]
    folder.mkdir(parents=True, exist_ok=True)
    stems = []
    for i, review in enumerate((invented_review(), ci_review())):
        stem = AS.new_stem() + f"{i}"
        project_file.save(review, folder / f"{stem}.lopside")
        (folder / f"{stem}.json").write_text(f'{{"name": "r{i}"}}', encoding="utf-8")
        stems.append(stem)

    def discard_first(items):
        first = next(r for r in items if r.review_file.stem == stems[0])
        return AS.RecoveryChoice(discard=[first])

    w = make_window(ask_recover=discard_first)
    assert not (folder / f"{stems[0]}.lopside").exists()
    assert (folder / f"{stems[1]}.lopside").exists()
    assert w.session.review == Review()  # nothing restored


# ------------------------------------------------------------------ issue 22 item 3: locks


def _foreign_lock(
    path: Path, *, host: str, pid: int, age_s: float, this_machine: bool = False
) -> None:
    """A QLockFile's file as another process wrote it (pid, app name, host name, ids).

    ``this_machine`` writes this machine's and this boot's ids (Qt checks them to tell a
    lock of this PC from one of another PC with the same name).
    """
    ids = "0123456789abcdef\nfedcba9876543210"
    if this_machine:
        ids = (
            bytes(QSysInfo.machineUniqueId()).decode()
            + "\n"
            + bytes(QSysInfo.bootUniqueId()).decode()
        )
    path.write_text(f"{pid}\nLopside\n{host}\n{ids}\n")
    t = time.time() - age_s
    os.utime(path, (t, t))


def _orphan(folder: Path, stem: str, review) -> None:
    project_file.save(review, folder / f"{stem}.lopside")
    meta = f'{{"name": "{stem}", "title": "{review.details.title}"}}'
    (folder / f"{stem}.json").write_text(meta, encoding="utf-8")


def test_a_lock_from_another_pc_is_taken_over_when_old(user_state):
    # issue 22 item 3: locks never went stale when written on another PC (roaming profile)
    from lopside.window.app import make_application

    make_application()
    folder = user_state["autosave"]
    folder.mkdir(parents=True, exist_ok=True)
    _orphan(folder, "autosave-old-pc", ci_review())
    _foreign_lock(
        folder / "autosave-old-pc.lock", host="WARD-PC-17", pid=4242, age_s=AS.STALE_AFTER_S + 60
    )
    _orphan(folder, "autosave-live-pc", invented_review())
    _foreign_lock(folder / "autosave-live-pc.lock", host="WARD-PC-18", pid=4243, age_s=5)
    found = AS.find_recoverable(folder)
    try:
        # the old lock is taken over; the fresh one (a live window on another PC) is not
        assert [r.review_file.stem for r in found] == ["autosave-old-pc"]
        assert found[0].title == ci_review().details.title
    finally:
        for r in found:
            r.release()


def test_a_running_window_keeps_its_lock_fresh(make_window, user_state):
    w = make_window(ci_review())
    lock = w.autosaver.lock_file
    t = time.time() - AS.STALE_AFTER_S - 60
    os.utime(lock, (t, t))
    w.autosaver.refresh_lock()  # what the heartbeat timer does every minute
    assert time.time() - lock.stat().st_mtime < 60
    assert w.autosaver.heartbeat.isActive()
    assert w.autosaver.heartbeat.interval() < AS.STALE_AFTER_S * 1000 / 2


def test_pid_reuse_neither_hides_nor_deletes_another_runs_autosave(make_window, user_state):
    # issue 22 item 3: an autosave named after a process id that a later run reuses was
    # skipped, then deleted on that run's clean exit
    folder = user_state["autosave"]
    folder.mkdir(parents=True, exist_ok=True)
    pid = os.getpid()  # a crashed run that had the process id this test process now has
    old_style = f"autosave-{pid}"
    _orphan(folder, old_style, ci_review())
    _foreign_lock(
        folder / f"{old_style}.lock",
        host=QSysInfo.machineHostName(),  # the name QLockFile writes
        pid=pid,
        age_s=AS.STALE_AFTER_S + 60,
    )
    offered = []
    w = make_window(ask_recover=lambda items: offered.extend(items))  # decide later
    assert [r.review_file.stem for r in offered] == [old_style]
    assert w.autosaver.stem != old_style and str(pid) in w.autosaver.stem
    # a clean exit of this run removes only its own files
    w.stack.push_edit(ed.SetDetail("title", "this run's own work"))
    assert w.autosaver.save_now()
    own = w.autosaver.file
    w._closing_ok = True
    w.close()
    assert not own.exists()
    assert (folder / f"{old_style}.lopside").exists()


def test_autosave_names_never_collide():
    names = {AS.new_stem() for _ in range(2000)}
    assert len(names) == 2000


def test_lock_files_of_gone_windows_are_cleaned(user_state):
    from lopside.window.app import make_application

    make_application()
    folder = user_state["autosave"]
    folder.mkdir(parents=True, exist_ok=True)
    for i in range(5):  # runs ended by SIGTERM before any autosave
        _foreign_lock(
            folder / f"autosave-x{i}.lock", host="OTHER", pid=10 + i, age_s=AS.STALE_AFTER_S * 2
        )
    _foreign_lock(folder / "autosave-live.lock", host="OTHER", pid=99, age_s=1)
    AS.find_recoverable(folder)
    assert sorted(p.name for p in folder.iterdir()) == ["autosave-live.lock"]


def test_autosave_starts_soon_after_the_first_edit_while_typing_goes_on(make_window, qtbot):
    w = make_window(ci_review())
    saver = w.autosaver
    w.update_views()  # the first analysis (imports) done before timing anything
    saver.timer.setInterval(2000)
    w.stack.push_edit(ed.SetCell(0, "study", "a"))
    assert saver.timer.isActive()
    qtbot.wait(600)
    w.stack.push_edit(ed.SetCell(0, "study", "ab"))  # typing does not push it back
    # on a loaded machine the wait may outlast the timer: then the autosave is already done
    assert saver.file.exists() or (
        saver.timer.isActive() and saver.timer.remainingTime() <= 2000 - 400
    )
    qtbot.waitUntil(saver.file.exists, timeout=5000)


def test_an_autosave_that_fails_says_so(make_window, monkeypatch):
    w = make_window(ci_review())

    def full(*a, **k):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(project_file, "save_workbook", full)  # autosave writes every outcome
    w.stack.push_edit(ed.SetCell(0, "study", "typed"))
    assert not w.autosaver.save_now()
    assert "Autosave failed" in w.last_message and "No space left" in w.last_message


# ------------------------------------------------------------------ case 3: the wheel


def _wheel(widget: QWidget, dy: int) -> None:
    pos = QPointF(widget.width() / 2, widget.height() / 2)
    glob = QPointF(widget.mapToGlobal(QPoint(int(pos.x()), int(pos.y()))))
    ev = QWheelEvent(
        pos,
        glob,
        QPoint(0, 0),
        QPoint(0, dy),
        Qt.NoButton,
        Qt.NoModifier,
        Qt.NoScrollPhase,
        False,
    )
    QApplication.sendEvent(widget, ev)


def _value(widget: QWidget):
    if isinstance(widget, QComboBox):
        return widget.currentIndex()
    if isinstance(widget, QAbstractSpinBox):
        return widget.text()
    return widget.value()


def test_the_wheel_changes_nothing_without_focus_anywhere_in_the_window(make_window, qtbot):
    """Every combo box, spin box and slider in the window, found by walking the widget
    tree on every tab: a wheel turn over it without focus changes neither it nor the review.
    """
    from lopside.window import guards

    w = make_window(invented_review())
    w.update_views()
    guarded: dict[int, QWidget] = {}
    for tabs in (w.left, w.views):
        for i in range(tabs.count()):
            tabs.setCurrentIndex(i)
            QApplication.processEvents()
            w.refresh_all_views()
            for child in w.findChildren(QWidget):
                if guards.is_guarded(child):
                    guarded[id(child)] = child
    # the judgement boxes of the Causes tab were the trap of issue 13 case 3
    assert all(id(j) in guarded for j in w.causes.judgement.values())
    assert len(guarded) >= 10
    review, settings = w.session.review, w.session.settings
    changed, wheel_focus = [], []
    for widget in guarded.values():
        widget.clearFocus()
        assert not widget.hasFocus()
        if widget.focusPolicy() & Qt.WheelFocus == Qt.WheelFocus:  # strong focus at most
            wheel_focus.append(widget)
        before = _value(widget)
        for dy in (-120, 120, -120):
            _wheel(widget, dy)
            QApplication.processEvents()
            if _value(widget) != before:
                changed.append(widget.accessibleName() or widget.objectName() or repr(widget))
                break
    assert changed == []
    assert wheel_focus == []
    assert w.session.review is review and w.session.settings is settings
    assert not w.session.dirty


def test_the_wheel_still_works_on_a_focused_box(make_window):
    w = make_window(invented_review())
    w.views.setCurrentWidget(w.causes)
    box = w.causes.judgement["chance"]
    w.activateWindow()
    box.setFocus(Qt.OtherFocusReason)
    QApplication.processEvents()
    if not box.hasFocus():
        pytest.skip("the offscreen platform gave no keyboard focus")
    before = box.currentIndex()
    _wheel(box, -120)
    assert box.currentIndex() != before


# ------------------------------------------------------------------ case 4: New resets all


def _all_texts(w) -> list[str]:
    """Every text a user could see in the window: widgets, table cells, figure texts."""
    out = [w.windowTitle(), w.statusBar().currentMessage(), w.status_label.text()]
    for child in w.findChildren(QWidget):
        if isinstance(child, (QLabel, QAbstractButton, QLineEdit)):
            out.append(child.text())
        elif isinstance(child, (QPlainTextEdit, QTextEdit)):
            out.append(child.toPlainText())
        elif isinstance(child, QComboBox):
            out.append(child.currentText())
    m = w.studies.model
    for r in range(m.rowCount()):
        for c in range(m.columnCount()):
            out.append(str(m.data(m.index(r, c)) or ""))
    from matplotlib.text import Text

    for panel in w.view_panels:
        fig = getattr(panel, "figure", None)
        if fig is not None:
            out.extend(t.get_text() for t in fig.findobj(Text))
    return out


def test_new_review_leaves_nothing_of_the_old_one_in_any_view(make_window, qtbot):
    """Issue 13 case 4: after New the forest kept eleven studies, the status bar kept
    'k = 11 · random effects ...', the power tab 100 %, the tests tab its scroll."""
    from lopside.summary import pooled_text

    a = invented_review()
    w = make_window(a)
    w.update_views()
    for i in range(w.views.count()):  # every view shows review A
        w.views.setCurrentIndex(i)
        QApplication.processEvents()
        w.refresh_all_views()
    w.forest.draw_now()
    w.power.bar.setValue(100)  # as after a finished simulation
    w.views.setCurrentWidget(w.tests)
    w.tests.browser.verticalScrollBar().setValue(w.tests.browser.verticalScrollBar().maximum())
    markers = [s.study for s in a.studies] + [a.details.title, f"k = {len(a.studies)}"]
    markers.append(pooled_text(w.result.random, w.result.measure))
    seen = "\n".join(_all_texts(w))
    assert all(m in seen for m in markers[:3]), "the test must see review A first"

    w.new_review()
    w.wait_for_analysis()
    for i in range(w.views.count()):
        w.views.setCurrentIndex(i)
        QApplication.processEvents()
        w.refresh_all_views()
    texts = "\n".join(_all_texts(w))
    assert [m for m in markers if m in texts] == []
    assert w.power.bar.value() == 0
    assert w.tests.browser.verticalScrollBar().value() == 0
    assert not w.forest.showing_figure() and w.forest.message.text()


def test_a_failing_view_says_so_and_reports_it(make_window, reports, monkeypatch):
    from lopside.window import plots

    w = make_window(invented_review())
    w.update_views()

    def broken(self, result):
        raise ZeroDivisionError("float division by zero")

    monkeypatch.setattr(plots.ForestPanel, "build", broken)
    w.views.setCurrentWidget(w.forest)
    w.forest.show_result(w.result, force=True)
    QApplication.processEvents()
    assert not w.forest.showing_figure()
    assert "could not be shown" in w.forest.message.text()
    assert "ZeroDivisionError" in w.forest.message.text()
    assert reports and "ZeroDivisionError" in reports[0][0]
    log = Path(reports[0][2])
    assert log.exists() and "ZeroDivisionError" in log.read_text(encoding="utf-8")


def test_an_exception_in_a_slot_becomes_a_report(make_window, reports, qtbot):
    from lopside.window import guards

    make_window()

    def slot():
        raise RuntimeError("invented failure in a slot")

    with qtbot.capture_exceptions() as caught:
        guards.install_exception_hook()  # chained before pytest-qt's own capture
        QTimer.singleShot(0, slot)
        qtbot.waitUntil(lambda: bool(reports), timeout=3000)
    assert caught  # the exception also reached the previous hook
    summary, report, log = reports[0]
    assert "invented failure in a slot" in summary and "Traceback" in report
    assert "invented failure in a slot" in Path(log).read_text(encoding="utf-8")


def test_the_report_dialog_offers_the_report_to_copy(make_window, qtbot):
    from lopside.window import guards

    make_window()
    dlg = guards.ReportDialog("RuntimeError: x", "Traceback ... x", "/tmp/lopside.log")
    qtbot.addWidget(dlg)
    assert dlg.report.isReadOnly() and dlg.report.toPlainText() == "Traceback ... x"
    copy = [b for b in dlg.findChildren(QAbstractButton) if "Copy" in b.text()][0]
    copy.click()
    assert QApplication.clipboard().text() == "Traceback ... x"


# ------------------------------------------------------------------ case 6: text at entry


def test_a_lone_surrogate_is_refused_at_entry_and_the_review_still_saves(make_window, tmp_path):
    w = make_window(ci_review())
    assert not w.stack.push_edit(ed.SetDetail("title", "Invented \ud800 title"))
    assert "Title:" in w.last_message and "U+D800" in w.last_message
    target = tmp_path / "ok.lopside"
    w.ask_save_path = lambda *a: str(target)
    assert w.save()
    assert project_file.load(target)[0] == ci_review()


# ------------------------------------------------------------------ case 7: changed outside


def test_a_file_changed_outside_asks_and_opens_read_only(make_window, tmp_path):
    path = tmp_path / "edited.lopside"
    project_file.save(ci_review(), path)
    path.write_text(
        path.read_text(encoding="utf-8").replace("Study 1", "Study one"), encoding="utf-8"
    )
    before = path.read_bytes()
    asked = []
    w = make_window(ask_open_changed=lambda name: asked.append(name) or False)
    assert not w.open_path(path, ask=False)
    assert asked == ["edited.lopside"] and w.session.review == Review()
    w.ask_open_changed = lambda name: True
    assert w.open_path(path, ask=False)
    assert w.session.review.studies[0].study == "Study one"
    assert "read-only" in w.windowTitle()
    # Save asks for a name instead of writing over the file
    w.stack.push_edit(ed.SetCell(0, "study", "Study 1"))
    offered = []
    w.ask_save_path = lambda folder, title, filt: offered.append(folder) or ""
    assert not w.save()
    assert offered and path.read_bytes() == before


# ------------------------------------------------------------------ case 8: failed save


def test_a_failed_save_on_close_is_a_dialog_with_save_elsewhere(make_window, tmp_path, monkeypatch):
    # issue 13 case 8: the only feedback was a 15-second status-bar message
    target = tmp_path / "r.lopside"
    project_file.save(ci_review(), target)
    asked = []
    w = make_window(
        ask_save_changes=lambda name: "save",
        ask_save_failed=lambda name, error: asked.append((name, error)) or True,
    )
    assert w.open_path(target)
    w.stack.push_edit(ed.SetCell(0, "study", "unsaved work"))
    real_write = project_file.write_atomic

    def refused(path, data):
        if Path(path) == target:
            raise PermissionError(13, "Permission denied", str(target))
        return real_write(path, data)

    monkeypatch.setattr(project_file, "write_atomic", refused)
    elsewhere = tmp_path / "elsewhere.lopside"
    w.ask_save_path = lambda *a: str(elsewhere)
    w.close()
    assert asked and asked[0][0] == "r.lopside" and "Permission denied" in asked[0][1]
    assert project_file.load(elsewhere)[0].studies[0].study == "unsaved work"
    assert not w.isVisible()


def test_a_failed_save_without_save_elsewhere_keeps_the_window_open(make_window, monkeypatch):
    w = make_window(
        ci_review(),
        ask_save_changes=lambda name: "save",
        ask_save_failed=lambda name, error: False,
    )
    w.ask_save_path = lambda *a: "/nonexistent-folder-for-lopside/r.lopside"
    w.stack.push_edit(ed.SetCell(0, "study", "unsaved"))
    w.close()
    assert w.isVisible() and w.session.dirty


# ------------------------------------------------------------------ issue 22 item 4: samples


def test_a_sample_opens_read_only_and_save_asks_for_a_place(make_window, tmp_path):
    from lopside.paths import sample_reviews

    sample = next(p for p in sample_reviews() if p.suffix == ".lopside")
    before = sample.read_bytes()
    w = make_window()
    assert w.open_sample(sample)
    assert "read-only" in w.windowTitle()
    w.stack.push_edit(ed.SetCell(0, "study", "My own copy"))
    asked = []
    mine = tmp_path / "mine.lopside"
    w.ask_save_path = lambda folder, title, filt: asked.append(folder) or str(mine)
    assert w.save()  # Ctrl+S
    assert asked and not asked[0].startswith(str(sample.parent))
    assert sample.read_bytes() == before
    assert project_file.load(mine)[0].studies[0].study == "My own copy"
    assert "read-only" not in w.windowTitle() and w.session.path == mine


def test_saving_into_the_samples_folder_is_refused(make_window):
    from lopside.paths import sample_reviews

    sample = next(p for p in sample_reviews() if p.suffix == ".lopside")
    names = sorted(p.name for p in sample.parent.iterdir())
    w = make_window()
    assert w.open_sample(sample)
    w.ask_save_path = lambda *a: str(sample)
    assert not w.save()
    assert w.last_message == M.SAMPLE_FOLDER_REFUSED
    assert sorted(p.name for p in sample.parent.iterdir()) == names


# ------------------------------------------------------------------ exports


def test_the_sheet_export_never_writes_over_the_review(make_window, tmp_path):
    path = tmp_path / "review.lopside"
    project_file.save(invented_review(), path)
    before = path.read_bytes()
    w = make_window()
    assert w.open_path(path)
    w.ask_save_path = lambda *a: str(path)
    assert w.export_sheet() is None
    assert path.read_bytes() == before
    assert "review.lopside" in w.last_message


def test_a_locked_sheet_offers_a_new_name(make_window, tmp_path, monkeypatch, qtbot):
    # issue 22 item 6: a PDF viewer holds the old sheet open (Windows refuses the rename)
    from lopside import fileio

    w = make_window(invented_review())
    out = tmp_path / "sheet.pdf"
    out.write_bytes(b"%PDF-1.4 the sheet open in a viewer")
    real_replace = os.replace

    def locked(src, dst):
        if Path(dst) == out:
            raise PermissionError(13, "Permission denied")
        return real_replace(src, dst)

    monkeypatch.setattr(fileio.os, "replace", locked)
    offers = []
    w.ask_locked = lambda error, suggestion: offers.append((error, suggestion)) or True
    worker = w.export_sheet(str(out))
    qtbot.waitUntil(lambda: bool(offers), timeout=60000)
    assert "open in another program" in offers[0][0] and offers[0][1] == "sheet (2).pdf"
    second = w.sheet_worker
    assert second is not worker
    qtbot.waitUntil(lambda: not second.isRunning(), timeout=60000)
    assert (tmp_path / "sheet (2).pdf").read_bytes().startswith(b"%PDF")
    assert out.read_bytes() == b"%PDF-1.4 the sheet open in a viewer"


# ------------------------------------------------------------------ issue 22 item 7


@pytest.mark.skipif(not hasattr(os, "symlink"), reason="needs symlinks")
def test_recent_files_and_last_folder_keep_the_path_as_chosen(make_window, tmp_path):
    # a mapped drive letter (H:\) must not become a UNC path; a symlinked folder stands in
    real = tmp_path / "server-share"
    real.mkdir()
    project_file.save(ci_review(), real / "r.lopside")
    mapped = tmp_path / "H-drive"
    mapped.symlink_to(real)
    w = make_window()
    assert w.open_path(mapped / "r.lopside")
    assert w.prefs.recent_files()[0] == str(mapped / "r.lopside")
    assert w.prefs.last_folder() == str(mapped)


def test_save_as_never_writes_over_the_imported_table(make_window, tmp_path):
    csv = tmp_path / "table.csv"
    csv.write_text(
        "study,estimate,lower,upper\nInvented A,0.8,0.6,1.1\nInvented B,0.7,0.5,0.98\n",
        encoding="utf-8",
    )
    before = csv.read_bytes()
    w = make_window(ask_measure=lambda name: "OR")
    assert w.open_path(csv)
    w.ask_save_path = lambda *a: str(csv)
    assert not w.save()
    assert csv.read_bytes() == before
    assert "table.csv" in w.last_message and ".lopside" in w.last_message


def test_recovered_work_on_a_sample_stays_read_only(make_window, user_state, tmp_path):
    from lopside.paths import sample_reviews

    sample = next(p for p in sample_reviews() if p.suffix == ".lopside")
    before = sample.read_bytes()
    first = make_window()
    assert first.open_sample(sample)
    first.stack.push_edit(ed.SetCell(0, "study", "Edited sample"))
    assert first.autosaver.save_now()
    stem = first.autosaver.stem
    # the window's lock goes as after a crash (the process is gone): its files stay
    first.autosaver.lock.unlock()
    _foreign_lock(  # a process of this PC that is gone: stale at once, whatever its age
        first.autosaver.lock_file,
        host=QSysInfo.machineHostName(),
        pid=2**22 + 17,
        age_s=5,
        this_machine=True,
    )
    first.autosaver.close = lambda: None  # its clean exit must not remove them
    offered = []
    w = make_window(ask_recover=lambda items: offered.extend(items) or list(items))
    assert [r.review_file.stem for r in offered] == [stem]
    assert w.session.review.studies[0].study == "Edited sample"
    assert "read-only" in w.windowTitle()
    mine = tmp_path / "mine.lopside"
    w.ask_save_path = lambda *a: str(mine)
    assert w.save()
    assert sample.read_bytes() == before and mine.exists()


def test_the_recovery_dialog_restores_only_what_is_ticked(make_window, qtbot):
    from lopside.window.recovery import RecoveryDialog, describe

    make_window()
    items = [
        AS.Recoverable(
            Path(f"/nowhere/{AS.PREFIX}{i}.lopside"),
            f"/reviews/r{i}.lopside" if i else "",
            f"r{i}",
            f"Invented review {i}",
            time.time(),
            i + 3,
            "WARD-PC-17",
            AS.make_lock(Path(f"/nowhere/{i}.lock")),
        )
        for i in range(3)
    ]
    assert describe(items[0])[1] == "(never saved)" and describe(items[2])[3] == "5"
    dlg = RecoveryDialog(items)
    qtbot.addWidget(dlg)
    assert dlg.tree.topLevelItemCount() == 3
    dlg.tree.topLevelItem(1).setCheckState(0, Qt.Unchecked)
    dlg.restore_button.click()
    assert dlg.choice.restore == [items[0], items[2]] and dlg.choice.discard == []
    later = RecoveryDialog(items)
    qtbot.addWidget(later)
    later.later_button.click()
    assert later.choice.restore == [] and later.choice.discard == []


def test_the_wheel_over_an_unfocused_box_scrolls_the_page_instead(make_window):
    w = make_window(invented_review())
    w.update_views()
    w.views.setCurrentWidget(w.causes)
    w.refresh_all_views()
    QApplication.processEvents()
    bar = w.causes.verticalScrollBar()
    if bar.maximum() == 0:
        pytest.skip("the causes page fits without scrolling at this size")
    bar.setValue(0)
    box = w.causes.judgement["chance"]
    box.clearFocus()
    before = box.currentIndex()
    _wheel(box, -120)
    assert box.currentIndex() == before and bar.value() > 0


def test_a_failing_text_view_says_so_and_the_status_bar_still_updates(make_window, reports):
    w = make_window(invented_review())
    w.update_views()
    w.views.setCurrentWidget(w.tests)

    def broken(result):
        raise KeyError("egger")

    w.tests._build = broken
    w.stack.push_edit(ed.SetCell(0, "study", "Renamed"))  # a new result: views redraw
    w.wait_for_analysis()
    w.update_views()
    assert "could not be shown" in w.tests.plain_text() and "KeyError" in w.tests.plain_text()
    assert w.status_label.text().startswith(f"k = {len(invented_review().studies)}")
    assert reports and "KeyError" in reports[0][0]


def test_the_figure_export_never_writes_over_the_review(make_window, tmp_path):
    path = tmp_path / "review.lopside"
    project_file.save(invented_review(), path)
    before = path.read_bytes()
    w = make_window()
    assert w.open_path(path)
    w.update_views()
    w.ask_save_path = lambda *a: str(path)
    assert not w.export_figure()
    assert path.read_bytes() == before
    png = tmp_path / "funnel.png"
    w.ask_save_path = lambda *a: str(png)
    assert w.export_figure()
    assert png.read_bytes().startswith(b"\x89PNG")


def test_a_changed_autosave_is_restored_and_said_so(make_window, user_state):
    folder = user_state["autosave"]
    folder.mkdir(parents=True, exist_ok=True)
    stem = AS.new_stem()
    _orphan(folder, stem, ci_review())
    f = folder / f"{stem}.lopside"
    f.write_text(f.read_text(encoding="utf-8").replace("Study 2", "Study two"), "utf-8")
    w = make_window(ask_recover=lambda items: list(items))
    assert w.session.review.studies[1].study == "Study two"
    assert M.RECOVERED_CHANGED in w.last_message
