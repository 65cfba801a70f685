"""The Lopside main window: the study table and review details on the left, live views right.

Design invariants
-----------------
* The window wraps a :class:`lopside.session.Session`; every change is an edit pushed on
  the :class:`~lopside.window.undo.EditStack`; every number shown comes from
  ``session.analyse()``.
* Views update ~50 ms after the last edit (one analysis per burst of typing), and only the
  visible view redraws; the others catch up when they are shown.
* Questions that would open a modal dialog (recover? save changes? which file?) go through
  the ``ask_*`` callables, which tests replace.
* "The review changed completely" (New, Open, recovery) is the session's ``reset`` change;
  :meth:`MainWindow.reset_views` is the one place that makes every view, the status bar
  and the progress bars forget the previous review.
* A view that fails says so in place of its content (and the error is reported with the
  log file's path); it never keeps stale content. See :mod:`lopside.window.guards`.
* Nothing the user made is changed without being asked: samples and files changed
  outside Lopside open read-only (Save asks for a name), exports never write over the
  review, a failed save is a dialog with "save elsewhere".
"""

from __future__ import annotations

import os
from collections.abc import Callable
from pathlib import Path

from PySide6.QtCore import QByteArray, QPoint, Qt, QTimer, QUrl, Signal
from PySide6.QtGui import QAction, QDesktopServices, QGuiApplication, QImage, QKeySequence
from PySide6.QtWidgets import (
    QApplication,
    QFileDialog,
    QInputDialog,
    QLabel,
    QMainWindow,
    QMessageBox,
    QSplitter,
    QTabWidget,
)

from .. import edits as ed
from ..fileio import OutputLocked, OutputRefused, check_output
from ..model.project_file import SUFFIX, ChangedOutside
from ..model.review import MEASURE_NAMES, MEASURES
from ..session import Session
from . import guards
from . import messages as M
from . import prefs as P
from .adjust_panel import AdjustPanel
from .adjust_panel import adjust_sections as _adjust_sections  # noqa: F401 - tests read it
from .autosave import Autosaver, Recoverable, as_choice, find_recoverable
from .causes import CausesPanel
from .details_form import DetailsForm
from .errors import details, plain, show_error
from .paste_dialog import PasteDialog
from .plots import CompanionPanel, ForestPanel, FunnelPanel
from .power_panel import PowerPanel
from .screen_fit import keep_on_screen, place_window, screen_signature
from .sections import SectionsPanel
from .study_panel import StudyPanel
from .undo import EditStack
from .workers import AnalysisWorker, SheetWorker

DEBOUNCE_MS = 50
OPEN_FILTER = (
    "Reviews and study tables (*.lopside *.json *.csv *.xlsx *.txt *.pdf);;"
    "Lopside projects (*.lopside);;Study tables (*.csv *.xlsx);;Pasted rows (*.txt);;"
    "A review's PDF (*.pdf)"
)
ACCEPTED_SUFFIXES = (SUFFIX, ".json", ".csv", ".xlsx", ".txt", ".pdf")


# ------------------------------------------------------------------ summary section choices


def _pooled_sections(result):
    from .. import summary as S

    out = [
        S.data_section(result),
        S.row_flags_section(result),
        S.reconciliation_section(result),
        S.pooled_section(result),
        S.heterogeneity_section(result),
    ]
    sg = S.subgroups_section(result)
    if sg is not None:
        out.append(sg)
    return out


def _tests_sections(result):
    from .. import summary as S

    out = [S.tests_section(result), S.applicability_section(result)]
    try:
        from ..assessment import assessment_of

        # the one reading of this result (shared with the Causes view, sheet and JSON)
        out.insert(0, S.small_study_section(assessment_of(result).appraisal))
    except ImportError:
        pass
    return out


# ------------------------------------------------------------------ default questions


def _ask_recover(window, items: list[Recoverable]):
    from .recovery import ask_recover

    return ask_recover(window, items)


def _ask_save_failed(window, name: str, error: str) -> bool:
    """True when the user wants to save elsewhere."""
    box = QMessageBox(QMessageBox.Warning, M.SAVE_FAILED_TITLE, "", parent=window)
    box.setText(M.SAVE_FAILED_TEXT.format(name=name, error=error))
    elsewhere = box.addButton(M.SAVE_ELSEWHERE, QMessageBox.AcceptRole)
    box.addButton(QMessageBox.Cancel)
    box.setDefaultButton(elsewhere)
    box.exec()
    return box.clickedButton() is elsewhere


def _ask_open_changed(window, name: str) -> bool:
    answer = QMessageBox.warning(
        window,
        M.CHANGED_OUTSIDE_TITLE,
        M.CHANGED_OUTSIDE_TEXT.format(name=name),
        QMessageBox.Open | QMessageBox.Cancel,
        QMessageBox.Cancel,
    )
    return answer == QMessageBox.Open


def _ask_locked(window, error: str, suggestion: str) -> bool:
    answer = QMessageBox.question(
        window,
        M.EXPORT_LOCKED_TITLE,
        M.EXPORT_LOCKED_TEXT.format(error=error, suggestion=suggestion),
        QMessageBox.Yes | QMessageBox.No,
        QMessageBox.Yes,
    )
    return answer == QMessageBox.Yes


def _ask_save_changes(window, name: str) -> str:
    answer = QMessageBox.question(
        window,
        M.UNSAVED_TITLE,
        M.UNSAVED_TEXT.format(name=name),
        QMessageBox.Save | QMessageBox.Discard | QMessageBox.Cancel,
        QMessageBox.Save,
    )
    return {QMessageBox.Save: "save", QMessageBox.Discard: "discard"}.get(answer, "cancel")


def _ask_open_path(window, folder: str) -> str:
    path, _ = QFileDialog.getOpenFileName(window, "Open a review", folder, OPEN_FILTER)
    return path


def _ask_save_path(window, folder: str, title: str, filt: str) -> str:
    path, _ = QFileDialog.getSaveFileName(window, title, folder, filt)
    return path


def _ask_measure(window, name: str) -> str | None:
    items = [f"{m} \u2013 {MEASURE_NAMES[m]}" for m in MEASURES]
    text, ok = QInputDialog.getItem(
        window, "Which measure?", M.ASK_MEASURE.format(name=name), items, 0, False
    )
    return text.split(" ", 1)[0] if ok else None


def _ask_decimal(window, name: str, examples) -> str | None:
    """Ask once how numbers the file does not settle are read; two readings side by side."""
    from ..cli_common import two_readings

    rows = []
    for place, text in examples[:4]:
        as_point, as_comma = two_readings(text)
        rows.append(
            f"<tr><td>{place}</td><td>{text}</td><td>{as_point}</td><td>{as_comma}</td></tr>"
        )
    box = QMessageBox(window)
    box.setWindowTitle("Decimal point or decimal comma?")
    box.setTextFormat(Qt.RichText)
    box.setText(
        M.ASK_DECIMAL.format(name=name)
        + "<table cellpadding='4'><tr><th>Where</th><th>Printed</th><th>Decimal point</th>"
        "<th>Decimal comma</th></tr>" + "".join(rows) + "</table>"
    )
    point = box.addButton("Decimal &point", QMessageBox.AcceptRole)
    comma = box.addButton("Decimal &comma", QMessageBox.AcceptRole)
    box.addButton(QMessageBox.Cancel)
    box.exec()
    if box.clickedButton() is point:
        return "point"
    if box.clickedButton() is comma:
        return "comma"
    return None


def _ask_open_sheet(window, path: str) -> bool:
    answer = QMessageBox.question(
        window,
        "Sheet written",
        M.SHEET_DONE.format(path=path) + "\n\nOpen it now?",
        QMessageBox.Yes | QMessageBox.No,
        QMessageBox.Yes,
    )
    return answer == QMessageBox.Yes


class MainWindow(QMainWindow):
    """The window. ``ask_*`` keyword arguments replace the modal questions (tests)."""

    analysed = Signal(object)

    def __init__(
        self,
        session: Session | None = None,
        *,
        prefs: P.Prefs | None = None,
        autosave: bool = True,
        ask_recover: Callable | None = None,
        ask_save_changes: Callable | None = None,
        ask_open_path: Callable | None = None,
        ask_save_path: Callable | None = None,
        ask_measure: Callable | None = None,
        ask_open_sheet: Callable | None = None,
        ask_save_failed: Callable | None = None,
        ask_open_changed: Callable | None = None,
        ask_locked: Callable | None = None,
        open_url: Callable[[QUrl], object] | None = None,
    ) -> None:
        super().__init__()
        self.session = session or Session()
        self.prefs = prefs or P.Prefs()
        self.ask_recover = ask_recover or (lambda items: _ask_recover(self, items))
        self.ask_save_changes = ask_save_changes or (lambda name: _ask_save_changes(self, name))
        self.ask_open_path = ask_open_path or (lambda folder: _ask_open_path(self, folder))
        self.ask_save_path = ask_save_path or (
            lambda folder, title, filt: _ask_save_path(self, folder, title, filt)
        )
        self.ask_measure = ask_measure or (lambda name: _ask_measure(self, name))
        #: asked when a file cannot settle its decimal mark (tests replace it)
        self.ask_decimal = lambda name, examples: _ask_decimal(self, name, examples)
        self.ask_open_sheet = ask_open_sheet or (lambda path: _ask_open_sheet(self, path))
        self.ask_save_failed = ask_save_failed or (
            lambda name, error: _ask_save_failed(self, name, error)
        )
        self.ask_open_changed = ask_open_changed or (lambda name: _ask_open_changed(self, name))
        self.ask_locked = ask_locked or (lambda err, sug: _ask_locked(self, err, sug))
        self.open_url = open_url or QDesktopServices.openUrl
        # the same questions for windows this one opens (restored autosaves)
        self._window_kwargs = {
            "prefs": self.prefs,
            "autosave": autosave,
            "ask_recover": ask_recover,
            "ask_save_changes": ask_save_changes,
            "ask_open_path": ask_open_path,
            "ask_save_path": ask_save_path,
            "ask_measure": ask_measure,
            "ask_open_sheet": ask_open_sheet,
            "ask_save_failed": ask_save_failed,
            "ask_open_changed": ask_open_changed,
            "ask_locked": ask_locked,
            "open_url": open_url,
        }
        self.spawned: list[MainWindow] = []
        self.result = None
        self.analysis_error = ""
        self.sheet_worker: SheetWorker | None = None
        self.last_message = ""
        self.last_error: tuple[str, str, str] | None = None
        self._closing_ok = False

        self.setWindowTitle("Lopside")
        self.setAcceptDrops(True)
        self.stack = EditStack(self.session, self)
        self.stack.cleanChanged.connect(self._clean_changed)
        self.stack.refused.connect(lambda msg: self.say(msg, 15000))

        # left: studies and review details
        self.left = QTabWidget()
        self.left.setObjectName("left tabs")
        self.studies = StudyPanel(self.session, self.stack)
        self.details = DetailsForm(self.session, self.stack.push_edit)
        self.left.addTab(self.studies, "&Studies")
        self.left.addTab(self.details, "Review &details")

        # right: live views
        self.views = QTabWidget()
        self.views.setObjectName("view tabs")
        self.views.setUsesScrollButtons(True)
        self.funnel = FunnelPanel()
        self.forest = ForestPanel()
        self.companions = CompanionPanel()
        self.pooled = SectionsPanel("Pooled results", _pooled_sections)
        self.tests = SectionsPanel("Tests", _tests_sections)
        self.adjust = AdjustPanel(self.session)
        self.causes = CausesPanel(self.session, self.stack.push_edit)
        self.power = PowerPanel(self.session)
        self.view_panels = (
            self.funnel,
            self.forest,
            self.companions,
            self.pooled,
            self.tests,
            self.adjust,
            self.causes,
            self.power,
        )
        for panel, title in zip(
            self.view_panels,
            (
                "Funnel",
                "Forest",
                "Cumulative/radial",
                "Pooled",
                "Tests",
                "Adjust",
                "Causes",
                "Power",
            ),
        ):
            self.views.addTab(panel, title)
        self._stale: set = set(self.view_panels)

        self.split = QSplitter(Qt.Horizontal)
        self.split.addWidget(self.left)
        self.split.addWidget(self.views)
        self.split.setStretchFactor(0, 5)
        self.split.setStretchFactor(1, 6)
        self.split.setChildrenCollapsible(False)
        self.setCentralWidget(self.split)
        self.status_label = QLabel("")
        self.statusBar().addPermanentWidget(self.status_label)

        # updates
        self._timer = QTimer(self)
        self._timer.setSingleShot(True)
        self._timer.setInterval(DEBOUNCE_MS)
        self._timer.timeout.connect(self.refresh_soon)
        self.analysis_worker = None
        self._rerun = False
        self.session.add_listener(changed=self._session_changed)
        self.views.currentChanged.connect(self._view_shown)
        self.studies.selection_changed.connect(self.funnel.set_selected_rows)
        self.funnel.point_clicked.connect(self._point_clicked)
        self.funnel.model_changed.connect(lambda m: self.session.update_settings(funnel_model=m))
        self.funnel.options_changed.connect(self._save_funnel_options)
        self.studies.measure_chosen.connect(self._measure_chosen)
        self.studies.buttons["paste"].clicked.connect(lambda: self.open_paste_dialog())
        self.studies.table.paste_requested.connect(self.paste_clipboard)
        self.studies.table.delete_cells_requested.connect(self.studies.clear_selected_cells)
        self.studies.mode_changed.connect(lambda m: self.prefs.set(P.ENTRY_MODE, m))
        self.details.status.connect(self.say)
        self.power.power_done.connect(lambda _p: self.update_views())

        self._build_menus()
        self._restore_prefs()
        self.autosaver = Autosaver(self.session, parent=self) if autosave else None
        if self.autosaver is not None:
            self.autosaver.failed.connect(
                lambda msg: self.say(M.AUTOSAVE_FAILED.format(error=msg), 0)
            )
        self._update_title()
        self._set_tab_order()
        # no change without intent: the wheel moves only a focused combo/spin box/slider
        guards.install_wheel_guard()
        guards.guard_tree(self)
        from .focus import FocusTracker

        self.focus_tracker = FocusTracker(self)

    # ------------------------------------------------------------------ menus

    def _action(self, text: str, slot, shortcut=None, tip: str = "") -> QAction:
        a = QAction(text, self)
        if shortcut is not None:
            a.setShortcut(QKeySequence(shortcut))
        if tip:
            a.setStatusTip(tip)
            a.setToolTip(tip)
        a.triggered.connect(lambda _checked=False: slot())
        return a

    def _build_menus(self) -> None:
        mb = self.menuBar()
        f = mb.addMenu("&File")
        self.act_new = self._action("&New review", self.new_review, QKeySequence.New)
        self.act_open = self._action(
            "&Open\u2026",
            self.open_dialog,
            QKeySequence.Open,
            "Open a project, CSV/XLSX study table or pasted .txt",
        )
        f.addAction(self.act_new)
        f.addAction(self.act_open)
        self.samples_menu = f.addMenu("Open a s&ample review (invented)")
        self.samples_menu.aboutToShow.connect(self._fill_samples)
        self.recent_menu = f.addMenu("Open &recent")
        self.recent_menu.aboutToShow.connect(self._fill_recent)
        f.addSeparator()
        self.act_save = self._action("&Save", self.save, QKeySequence.Save)
        self.act_save_as = self._action("Sa&ve as\u2026", self.save_as, QKeySequence.SaveAs)
        f.addAction(self.act_save)
        f.addAction(self.act_save_as)
        f.addSeparator()
        self.act_sheet = self._action(
            "&Export appraisal sheet (PDF)\u2026", self.export_sheet, "Ctrl+Shift+E"
        )
        self.act_figure = self._action(
            "Export the &figure shown\u2026", self.export_figure, "Ctrl+Shift+F"
        )
        self.act_copy_funnel = self._action(
            "&Copy the funnel plot as an image", self.copy_funnel, "Ctrl+Shift+C"
        )
        self.act_print = self._action(
            "&Print the funnel plot\u2026", self.print_funnel, QKeySequence.Print
        )
        for a in (self.act_sheet, self.act_figure, self.act_copy_funnel, self.act_print):
            f.addAction(a)
        f.addSeparator()
        f.addAction(self._action("&Quit", self.close, QKeySequence.Quit))

        e = mb.addMenu("&Edit")
        self.act_undo = self.stack.createUndoAction(self, "&Undo")
        self.act_undo.setShortcut(QKeySequence.Undo)
        self.act_redo = self.stack.createRedoAction(self, "&Redo")
        self.act_redo.setShortcut(QKeySequence.Redo)
        e.addAction(self.act_undo)
        e.addAction(self.act_redo)
        e.addSeparator()
        s = self.studies
        e.addAction(
            self._action("&Paste rows from a paper\u2026", self.open_paste_dialog, "Ctrl+Shift+V")
        )
        e.addAction(self._action("&Add a row", s.add_row, "Ctrl+Shift+N"))
        e.addAction(self._action("Dupli&cate rows", s.duplicate_rows, "Ctrl+D"))
        e.addAction(self._action("&Delete rows", s.delete_rows, "Ctrl+Shift+Del"))
        e.addAction(self._action("Mo&ve row up", lambda: s.move_current(-1), "Ctrl+Shift+Up"))
        e.addAction(self._action("Move row do&wn", lambda: s.move_current(1), "Ctrl+Shift+Down"))
        e.addAction(self._action("&Leave out / bring back", s.toggle_exclude, "Ctrl+E"))

        v = mb.addMenu("&View")
        v.addAction(self._action("The &study table", lambda: self._show_left(0), "Ctrl+Shift+T"))
        v.addAction(self._action("The review &details", lambda: self._show_left(1), "Ctrl+Shift+R"))
        v.addSeparator()
        for i in range(self.views.count()):
            v.addAction(
                self._action(self.views.tabText(i), lambda i=i: self._show_view(i), f"Ctrl+{i + 1}")
            )

        h = mb.addMenu("&Help")
        h.addAction(self._action("&Methods guide", self.show_guide, QKeySequence.HelpContents))
        h.addAction(self._action("&About Lopside", self.show_about))

    def _show_left(self, i: int) -> None:
        self.left.setCurrentIndex(i)
        if i == 0:
            self.studies.table.setFocus(Qt.ShortcutFocusReason)
        else:
            self.details.focus_first()

    def _show_view(self, i: int) -> None:
        self.views.setCurrentIndex(i)
        self.views.currentWidget().setFocus(Qt.ShortcutFocusReason)

    def _set_tab_order(self) -> None:
        s = self.studies
        order = [s.mode_box, s.measure_box, *s.buttons.values(), s.table, s.problems, self.views]
        for a, b in zip(order, order[1:]):
            self.setTabOrder(a, b)

    def _fill_samples(self) -> None:
        from ..paths import sample_reviews

        self.samples_menu.clear()
        try:
            samples = sample_reviews()
        except OSError:
            samples = []
        if not samples:
            a = self.samples_menu.addAction("(no sample reviews installed)")
            a.setEnabled(False)
        for p in samples:
            self.samples_menu.addAction(p.name, lambda p=p: self.open_sample(p))

    def _fill_recent(self) -> None:
        self.recent_menu.clear()
        items = self.prefs.recent_files()
        if not items:
            a = self.recent_menu.addAction("(none yet)")
            a.setEnabled(False)
        for i, p in enumerate(items):
            self.recent_menu.addAction(f"&{i + 1} {Path(p).name}", lambda p=p: self.open_path(p))

    # ------------------------------------------------------------------ prefs

    def _restore_prefs(self) -> None:
        # a geometry saved on another screen or scale is not reused; any is clamped
        placed = place_window(self, self.prefs.get_bytes(P.GEOMETRY), self.prefs.get_str(P.SCREEN))
        split = self.prefs.get_bytes(P.SPLITTER)
        if split is not None and placed != "default":
            self.split.restoreState(split)
        else:
            w = self.width()
            self.split.setSizes([w * 57 // 100, w - w * 57 // 100])
        self.views.setCurrentIndex(
            max(0, min(self.prefs.get_int(P.VIEW_TAB, 0), self.views.count() - 1))
        )
        mode = self.prefs.get_str(P.ENTRY_MODE, "ci")
        self.studies.set_mode(mode)
        state = {}
        for k, default in self.funnel.option_state().items():
            key = P.FUNNEL_PREFIX + k
            if isinstance(default, bool):
                state[k] = self.prefs.get_bool(key, default)
            else:
                state[k] = self.prefs.get_str(key, default)
        self.funnel.set_option_state(state)

    def _save_prefs(self) -> None:
        self.prefs.set(P.GEOMETRY, self.saveGeometry())
        self.prefs.set(P.SCREEN, screen_signature(self.screen()))
        self.prefs.set(P.SPLITTER, self.split.saveState())
        self.prefs.set(P.VIEW_TAB, self.views.currentIndex())
        self.prefs.set(P.ENTRY_MODE, self.studies.model.mode)
        self._save_funnel_options()
        self.prefs.sync()

    def _save_funnel_options(self) -> None:
        for k, v in self.funnel.option_state().items():
            self.prefs.set(P.FUNNEL_PREFIX + k, v)

    def showEvent(self, event) -> None:  # noqa: N802 - Qt API
        super().showEvent(event)
        if not getattr(self, "_placed_once", False) and not _headless():
            self._placed_once = True
            # the window manager's real frame is known only now: pull a window that
            # sticks out back in (headless platforms have no frame; place_window did it)
            QTimer.singleShot(0, lambda: keep_on_screen(self))

    # ------------------------------------------------------------------ start-up

    def finish_startup(self, path: str | None = None) -> None:
        """After the window is shown: recover unsaved work, open ``path``, first analysis."""
        recovered = False
        if self.autosaver is not None:
            recovered = self.offer_recovery(use_this_window=not path)
        if path and not recovered:
            self.open_path(path)
        elif self.session.review.studies and not recovered:
            self.studies.suggest_mode()
        self.update_views()

    def offer_recovery(self, *, use_this_window: bool = True) -> bool:
        """List every autosave left by windows that are gone; restore what the user picks.

        The first restored review goes into this window (when ``use_this_window``), each
        further one into a new window. Only what was restored or what the user chose to
        discard is deleted; a recovery that fails keeps its autosave and says where.
        Returns True when this window received a review.
        """
        own = (self.autosaver.stem,) if self.autosaver is not None else ()
        items = find_recoverable(self.autosaver.folder if self.autosaver else None, own)
        if not items:
            return False
        choice = as_choice(self.ask_recover(items), items)
        here = False
        for item in items:
            if item in choice.discard:
                item.discard()
            elif item in choice.restore:
                target = self if use_this_window and not here else self.spawn_window()
                if target.recover(item):
                    item.discard()  # the work now lives in the target's own autosave
                    here = here or target is self
                else:
                    item.release()
                    if target is not self:
                        target._closing_ok = True
                        target.close()
            else:
                item.release()  # decided later: offered again at the next start
        return here

    def spawn_window(self) -> MainWindow:
        """A new window with the same questions (for a second restored review)."""
        w = MainWindow(**self._window_kwargs)
        w.resize(self.size())
        w.move(self.pos() + QPoint(40 * (len(self.spawned) + 1), 40 * (len(self.spawned) + 1)))
        w.show()
        self.spawned.append(w)
        return w

    def recover(self, item: Recoverable) -> bool:
        from ..model import project_file
        from ..settings import AnalysisSettings

        changed = ""
        try:
            try:
                review, saved = project_file.load(item.review_file)
            except project_file.ChangedOutside as exc:
                # never silent: restored (it is all there is of that work), and said so
                review, saved = exc.review, exc.settings
                changed = " " + M.RECOVERED_CHANGED
            settings = AnalysisSettings.from_dict(saved)
        except (OSError, ValueError) as exc:
            msg = M.RECOVER_FAILED.format(name=item.name, error=exc, path=item.review_file)
            self.say(msg, 0)
            self._warn(M.RECOVER_TITLE, msg)
            return False
        read_only = item.read_only
        if item.original and _in_samples(os.path.dirname(item.original)):
            read_only = read_only or M.READ_ONLY_SAMPLE
        self.session.reset(review, settings, item.original or None, dirty=True, read_only=read_only)
        self.stack.reset()
        self.studies.suggest_mode()
        self.say(M.RECOVERED.format(name=item.name) + changed, 0 if changed else 6000)
        if self.autosaver is not None and not self.autosaver.save_now():
            # keep the old autosave: our own could not take the work over
            msg = M.RECOVER_FAILED.format(
                name=item.name, error=self.autosaver.last_error, path=item.review_file
            )
            self.say(msg, 0)
            return False
        self.update_views()
        return True

    def _warn(self, title: str, text: str) -> None:
        """A warning dialog after the current event (never in offscreen test runs)."""
        if _headless():
            return
        QTimer.singleShot(0, lambda: QMessageBox.warning(self, title, text))

    # ------------------------------------------------------------------ session events

    def _session_changed(self, change: ed.Change) -> None:
        if change.kind in ("details", "reset"):
            self.details.refresh()
            self.studies.refresh_measure()
        if change.kind in ("notes", "reset"):
            self.causes.refresh_notes()
        if change.kind == "settings":
            self.funnel.set_model(self.session.settings.funnel_model)
        if change.kind == "reset":
            self.funnel.set_model(self.session.settings.funnel_model)
            self.reset_views()
        self._update_title()
        self._timer.start()

    def _measure_chosen(self, measure: str) -> None:
        if measure != self.session.review.measure:
            self.stack.push_edit(ed.SetDetail("measure", measure))

    def refresh_soon(self) -> None:
        """After the debounce: show a cached analysis at once, else analyse in a worker.

        The analysis of a large review can take longer than a keystroke; running it off
        the GUI thread keeps typing responsive. Results for a state the user has already
        left are kept in the session's cache but not shown.
        """
        if self.session.has_analysis():
            self.update_views()
            return
        if self.analysis_worker is not None and (
            self.analysis_worker.isRunning() or getattr(self, "_worker_starting", False)
        ):
            self._rerun = True
            self.analysis_worker.cancel()  # its result would be stale: stop at its next stage
            return
        s = self.session
        # staged: the core stage (effects, pooling, tests, trim and fill) is drawn at once;
        # the full stage follows in the worker and is cancelled by the next edit
        core = None
        try:
            core = s.analyse_core()
        except Exception:  # noqa: BLE001 - the full stage (and update_views) reports it
            core = None
        self._awaiting_full = core is not None
        if core is not None:
            self.update_views()
        w = AnalysisWorker(s.review, s.settings, s.analysis_key(), self, core=core)
        w.finished_with.connect(self._analysis_done)
        w.failed.connect(self._analysis_failed)
        w.cancelled.connect(self._analysis_failed_or_cancelled)
        w.progress.connect(self._analysis_progress)
        self.analysis_worker = w
        self._rerun = False
        if core is None:
            self.status_label.setText("Analysing\u2026")
            w.start()
        else:
            # after the core stage's redraw (queued before this), so that the worker does
            # not compete with drawing the funnel for the interpreter
            self._worker_starting = True
            QTimer.singleShot(0, self._start_worker)

    def _start_worker(self) -> None:
        import shiboken6

        self._worker_starting = False
        w = self.analysis_worker
        # the window may have closed (and its worker been deleted) before this queued start
        if w is None or not shiboken6.isValid(w):
            return
        if not w.isRunning() and not w.isFinished():
            w.start()

    def _analysis_done(self, result, key) -> None:
        self._awaiting_full = False
        current = self.session.remember_analysis(key, result)
        if self._rerun or not current:
            self._rerun = False
            self.refresh_soon()
            return
        self.update_views()

    def _analysis_progress(self, stage: str, index: int, total: int) -> None:
        if self.result is not None and getattr(self.result, "stage", "") == "core":
            return  # the status already says the sensitivity analyses are being updated
        self.status_label.setText(M.ANALYSIS_PROGRESS.format(stage=stage, n=index + 1, of=total))

    def _analysis_failed_or_cancelled(self, key) -> None:
        self._analysis_failed("", key)

    def _analysis_failed(self, message: str, key) -> None:
        self._awaiting_full = False
        if self._rerun:
            self._rerun = False
            self.refresh_soon()
            return
        self.update_views()  # the synchronous path reports the error in the usual way

    def wait_for_analysis(self, timeout_ms: int = 30000) -> None:
        """Block until a running analysis has finished and been shown (tests, exports)."""
        from PySide6.QtCore import QDeadlineTimer

        deadline = QDeadlineTimer(timeout_ms)
        while (
            self._timer.isActive()
            or getattr(self, "_worker_starting", False)
            or (self.analysis_worker is not None and self.analysis_worker.isRunning())
        ):
            if deadline.hasExpired():
                break
            QApplication.processEvents()
            if self.analysis_worker is not None:
                self.analysis_worker.wait(20)
        QApplication.processEvents()

    def update_views(self) -> None:
        """Analyse (cached) and refresh the visible views; the rest are marked stale."""
        self._timer.stop()
        try:
            # the core stage while the full one runs in the worker (the status bar says so)
            result = self.session.analyse(allow_core=getattr(self, "_awaiting_full", False))
            self.analysis_error = ""
        except ModuleNotFoundError as exc:
            result = None
            self.analysis_error = M.NOT_AVAILABLE.format(part=exc.name)
        except Exception as exc:  # noqa: BLE001 - shown to the user; the window stays up
            result = None
            self.analysis_error = M.ANALYSIS_FAILED.format(error=plain(str(exc)))
            self.last_error = (M.ANALYSIS_FAILED_TITLE, self.analysis_error, details(exc))
        if result is not None and result is self.result:
            # nothing changed since the last update (e.g. the debounce after a cached
            # state): only a view shown since then may need catching up
            self._refresh_panel(self.views.currentWidget())
            return
        self.result = result
        self._update_status()
        try:
            self.studies.show_result(result)
        except Exception as exc:  # noqa: BLE001 - reported; the views still update
            guards.report_exception(exc, "study table")
        self._stale = set(self.view_panels)
        self._refresh_panel(self.views.currentWidget())
        self.analysed.emit(result)

    def reset_views(self) -> None:
        """The review changed completely (New, Open, recovery): forget the old one everywhere.

        Every view drops what it showed (figures, texts, scroll positions, progress), the
        status bar and the table's result go; the next analysis redraws from scratch.
        """
        self.result = None
        self.analysis_error = ""
        for panel in self.view_panels:
            reset = getattr(panel, "reset", None)
            try:
                if reset is not None:
                    reset()
            except Exception as exc:  # noqa: BLE001 - reported; the others still reset
                self._view_failed(panel, exc)
        self._stale = set(self.view_panels)
        try:
            self.studies.show_result(None)
        except Exception as exc:  # noqa: BLE001
            guards.report_exception(exc, "study table")
        self.status_label.setText(M.ANALYSING)

    def _refresh_panel(self, panel) -> None:
        if panel is None or panel not in self._stale:
            return
        self._stale.discard(panel)
        try:
            if self.result is None and self.analysis_error and hasattr(panel, "show_message"):
                panel.show_message(self.analysis_error)
                return
            panel.show_result(self.result)
        except Exception as exc:  # noqa: BLE001 - the view says so; reported with the log
            self._view_failed(panel, exc)

    def _view_failed(self, panel, exc: Exception) -> None:
        name = panel.objectName() or type(panel).__name__
        log = guards.report_exception(exc, f"the {name} view")
        text = M.VIEW_FAILED.format(error=f"{type(exc).__name__}: {exc}", log=log or M.ERROR_NO_LOG)
        show = getattr(panel, "show_message", None) or getattr(panel, "_show_message", None)
        if show is not None:
            try:
                show(text)
            except Exception:  # noqa: BLE001 - already reported
                pass

    def _view_shown(self, _index: int) -> None:
        self._refresh_panel(self.views.currentWidget())

    def refresh_all_views(self) -> None:
        """Bring every view up to date now (screenshots, self-test)."""
        for p in self.view_panels:
            self._refresh_panel(p)

    def _update_status(self) -> None:
        r = self.result
        if r is None:
            self.status_label.setText(self.analysis_error or M.NO_ANALYSIS)
            return
        try:
            from ..words.numbers import pooled_text

            text = f"k = {r.k} \u00b7 random effects {pooled_text(r.random, r.measure)}"
        except (ImportError, AttributeError, TypeError):
            text = f"k = {r.k}"
        if getattr(r, "stage", "full") == "core":
            text += M.CORE_STAGE_SUFFIX
        self.status_label.setText(text)

    def _clean_changed(self, _clean: bool) -> None:
        self._update_title()

    def _update_title(self) -> None:
        name = self.session.display_name()
        if self.session.read_only:
            name = M.READ_ONLY_TITLE.format(name=name)
        self.setWindowTitle(f"{name}[*] \u2013 Lopside")
        self.setWindowModified(self.session.dirty)

    def _point_clicked(self, row: int) -> None:
        self._show_left(0)
        self.studies.select_row(row)

    def say(self, text: str, ms: int = 6000) -> None:
        self.last_message = text
        self.statusBar().showMessage(text, ms)

    # ------------------------------------------------------------------ paste

    def open_paste_dialog(self, text: str | None = None) -> PasteDialog:
        """Open the paste dialog (window-modal, not blocking) and return it."""
        review = self.session.review
        dlg = PasteDialog(review.measure, text or "", self, empty=not review.studies)
        dlg.accepted.connect(lambda: self.insert_paste(dlg))
        dlg.setWindowModality(Qt.WindowModal)
        dlg.show()
        self.paste_dialog = dlg
        return dlg

    def insert_paste(self, dlg: PasteDialog) -> bool:
        """Insert what the dialog read, as ONE undo step."""
        rows = dlg.rows()
        if not rows:
            return False
        idx = self.studies.table.currentIndex()
        at = idx.row() + 1 if idx.isValid() else len(self.session.review.studies)
        edits: list[ed.Edit] = [ed.PasteBlock(at, tuple(rows))]
        m = dlg.chosen_measure()
        if m:
            edits.append(ed.SetDetail("measure", m))
        pub = dlg.chosen_published()
        if pub is not None and not self.session.review.details.published.is_complete():
            edits.append(ed.SetDetail("published", pub))
        account = dlg.account()
        if account is not None:
            # what was not read stays listed with the review (problems list, sheet)
            edits.append(ed.SetIntake(self.session.review.intake.plus(account)))
        n = len(rows)
        ok = self.stack.push_many(f"paste {n} row{'s' if n != 1 else ''}", edits)
        self.studies.suggest_mode()
        self.studies.select_row(at)
        return ok

    def paste_clipboard(self) -> None:
        """Ctrl+V: one value goes into the current cell; anything more opens the preview."""
        text = QGuiApplication.clipboard().text()
        if not text:
            return
        one = text.strip("\r\n")
        idx = self.studies.table.currentIndex()
        if "\n" not in one and "\t" not in one and idx.isValid():
            if idx.flags() & Qt.ItemIsEditable:
                self.studies.model.setData(idx, one, Qt.EditRole)
            return
        self.open_paste_dialog(text)

    # ------------------------------------------------------------------ files

    def _maybe_save(self) -> bool:
        """Ask about unsaved changes; True when it is fine to drop the current review."""
        self.causes.flush()
        if not self.session.dirty:
            return True
        answer = self.ask_save_changes(self.session.display_name())
        if answer == "save":
            return self.save()
        return answer == "discard"

    def new_review(self) -> None:
        if not self._maybe_save():
            return
        self.session.new()
        self.stack.reset()
        self.update_views()

    def open_dialog(self) -> None:
        if not self._maybe_save():
            return
        path = self.ask_open_path(self.prefs.last_folder())
        if path:
            self.open_path(path, ask=False)

    def open_sample(self, path) -> bool:
        """Open an invented sample read-only: Save asks for a place of the user's own."""
        return self.open_path(path, remember=False, read_only=M.READ_ONLY_SAMPLE)

    def open_path(
        self, path, *, remember: bool = True, ask: bool = True, read_only: str = ""
    ) -> bool:
        """Open a project or import a study table; errors are shown, never raised.

        A project changed outside Lopside is opened only when the user says so, and then
        read-only (Save asks for a name).
        """
        from ..cli_common import INPUT_ERRORS

        if ask and not self._maybe_save():
            return False
        from ..cli_common import DecimalUndecided

        p = Path(path)
        if p.suffix.lower() == ".pdf":
            return self.open_pdf(p)
        measure = None
        decimal = None
        accept_changed = False
        for _attempt in range(4):
            try:
                self.session.open(
                    p, measure, decimal, accept_changed=accept_changed, read_only=read_only
                )
                break
            except ChangedOutside:
                if accept_changed or not self.ask_open_changed(p.name):
                    self.say(M.OPEN_FAILED.format(name=p.name, error=M.READ_ONLY_CHANGED))
                    return False
                accept_changed = True
                read_only = read_only or M.READ_ONLY_CHANGED
                continue
            except DecimalUndecided as exc:
                decimal = self.ask_decimal(p.name, exc.examples) if decimal is None else None
                if decimal:
                    continue
                self._open_failed(p, exc)
                return False
            except INPUT_ERRORS as exc:
                if measure is None and "measure" in str(exc) and p.suffix.lower() != SUFFIX:
                    measure = self.ask_measure(p.name)
                    if measure:
                        continue
                self._open_failed(p, exc)
                return False
            except (OSError, ValueError) as exc:
                self._open_failed(p, exc)
                return False
        self.stack.reset()
        self.studies.suggest_mode()
        if remember:
            self.prefs.add_recent(p)
            # absolute, not resolved: a mapped drive (H:\) stays as the user chose it
            self.prefs.set(P.LAST_FOLDER, os.path.dirname(os.path.abspath(p)))
        self._update_title()
        self.update_views()
        self.say(f"Opened {p.name}." + (f" It is {read_only}." if read_only else ""))
        return True

    def open_pdf(self, p: Path):
        """Read a review's PDF in the background, then let the user pick the rows."""
        from PySide6.QtWidgets import QProgressDialog

        from .pdf_dialog import PdfDialog, PdfReadWorker

        worker = PdfReadWorker(str(p), self)
        progress = QProgressDialog(M.PDF_READING, "Cancel", 0, 0, self)
        progress.setWindowModality(Qt.WindowModal)
        progress.setMinimumDuration(500)
        progress.canceled.connect(worker.cancel)

        def step(done: int, total: int) -> None:
            progress.setMaximum(total)
            progress.setValue(done)

        def failed(message: str) -> None:
            progress.close()
            self._open_failed(p, ValueError(message))

        def done(doc) -> None:
            progress.close()
            dlg = PdfDialog(str(p), self, doc=doc)
            dlg.setWindowModality(Qt.WindowModal)
            dlg.accepted.connect(lambda: self._pdf_chosen(p, dlg))
            dlg.show()
            self.pdf_dialog = dlg

        worker.progress.connect(step)
        worker.failed.connect(failed)
        worker.finished_ok.connect(done)
        self.pdf_worker = worker
        worker.start()
        return worker

    def _pdf_chosen(self, p: Path, dlg) -> None:
        """A new review from the chosen lines, through the paste preview."""
        self.session.new()
        self.stack.reset()
        pages = ", ".join(str(n) for n in dlg.chosen_pages)
        note = dlg.reading().source_note(p.name)
        self.update_views()
        paste = self.open_paste_dialog(dlg.chosen_text())
        paste.set_origin(dlg.origin())  # the account names page and line of the PDF

        def added() -> None:
            # where the rows came from stays with the review (shown on screen and sheet)
            self.stack.push_many("note the PDF page", [ed.SetDetail("source_note", note)])
            self.say(M.PDF_FROM.format(rows=len(paste.rows()), pages=pages, name=p.name), 15000)

        paste.accepted.connect(added)

    def _open_failed(self, p: Path, exc: Exception) -> None:
        # plain words in the dialog; the file's path and the exception behind "Show details"
        msg = M.OPEN_FAILED.format(name=p.name, error=plain(str(exc), p.name, str(p)))
        self.say(msg, 15000)
        self._error_dialog(M.OPEN_FAILED_TITLE, msg, details(exc, f"File: {p}"))

    def _error_dialog(self, title: str, text: str, detail: str) -> None:
        """Show an error box (not in headless runs); the last one is kept for tests."""
        self.last_error = (title, text, detail)
        if self.isVisible() and not _headless():
            QTimer.singleShot(0, lambda: show_error(self, title, text, detail))

    def save(self) -> bool:
        self.causes.flush()
        if self.session.path is None or self.session.read_only:
            return self.save_as()
        return self._save_to(self.session.path)

    def save_as(self) -> bool:
        self.causes.flush()
        folder = self.prefs.last_folder()
        if self.session.read_only or _in_samples(folder):
            folder = self._own_folder()
        name = self.session.path.name if self.session.path else None
        suggested = str(
            Path(folder) / (name or (self.session.review.details.title or "review")[:60] + SUFFIX)
        )
        while True:
            path = self.ask_save_path(suggested, "Save the review", f"Lopside project (*{SUFFIX})")
            if not path:
                return False
            if not Path(path).suffix:
                path = str(Path(path).with_suffix(SUFFIX))
            refused = ""
            if _in_samples(os.path.dirname(os.path.abspath(path))):
                refused = M.SAMPLE_FOLDER_REFUSED
            else:
                try:  # never over the CSV/XLSX/.txt it was imported from, never as a .csv
                    check_output(path, "lopside", (self.session.imported_from,), force=True)
                except OutputRefused as exc:
                    refused = str(exc)
            if not refused:
                return self._save_to(Path(path))
            self.say(refused, 15000)
            self._warn(M.SAVE_FAILED_TITLE, refused)
            if _headless():
                return False
            suggested = str(Path(self._own_folder()) / (Path(path).stem + SUFFIX))

    def _own_folder(self) -> str:
        folder = self.prefs.last_folder()
        if _in_samples(folder):
            from PySide6.QtCore import QStandardPaths

            folder = QStandardPaths.writableLocation(QStandardPaths.DocumentsLocation)
        return folder

    def _save_to(self, path: Path) -> bool:
        try:
            saved = self.session.save(path)
        except (OSError, ValueError) as exc:
            msg = M.SAVE_FAILED.format(
                name=Path(path).name, error=plain(str(exc), Path(path).name, str(path))
            )
            self.say(msg, 0)
            # a dialog, not only a status message; "save elsewhere" keeps the work
            if self.ask_save_failed(Path(path).name, str(exc)):
                return self.save_as()
            return False
        self.stack.mark_clean()
        self.prefs.add_recent(saved)
        self.prefs.set(P.LAST_FOLDER, os.path.dirname(os.path.abspath(saved)))
        if self.autosaver is not None:
            self.autosaver.remove()
        self._update_title()
        self.say(M.SAVED.format(name=saved.name))
        return True

    def dragEnterEvent(self, event) -> None:  # noqa: N802 - Qt API
        urls = event.mimeData().urls() if event.mimeData().hasUrls() else []
        if any(
            u.isLocalFile() and Path(u.toLocalFile()).suffix.lower() in ACCEPTED_SUFFIXES
            for u in urls
        ):
            event.acceptProposedAction()
        else:
            event.ignore()

    def dropEvent(self, event) -> None:  # noqa: N802 - Qt API
        for u in event.mimeData().urls():
            p = Path(u.toLocalFile())
            if p.suffix.lower() in ACCEPTED_SUFFIXES:
                event.acceptProposedAction()
                QTimer.singleShot(0, lambda p=p: self.open_path(p))
                return

    # ------------------------------------------------------------------ exports

    def export_sheet(self, path: str | None = None) -> SheetWorker | None:
        """Write the PDF sheet in a worker; returns the worker (started)."""
        self.causes.flush()
        self.update_views()
        if self.result is None:
            self.say(M.SHEET_FAILED.format(error=self.analysis_error or M.NO_ANALYSIS))
            return None
        if path is None:
            base = self.session.path.stem if self.session.path else "appraisal"
            path = self._ask_export_path(
                str(Path(self._own_folder()) / f"{base}-sheet.pdf"),
                "Export the appraisal sheet",
                "PDF (*.pdf)",
                "pdf",
            )
            if not path:
                return None
        elif self._refuse_export(path, "pdf"):
            return None
        w = SheetWorker(self.result, path, parent=self)
        w.finished_with.connect(self._sheet_done)
        w.failed.connect(lambda msg: self._sheet_failed(w, msg))
        self.sheet_worker = w
        self.say("Writing the appraisal sheet\u2026", 0)
        w.start()
        return w

    def _inputs(self) -> tuple:
        return (self.session.path, self.session.imported_from)

    def _refuse_export(self, path, kind: str) -> bool:
        """True (and the user is told why) when ``path`` must not receive the export."""
        try:
            # the file dialog has already asked before replacing an existing file
            check_output(path, kind, self._inputs(), force=True)
        except OutputRefused as exc:
            text = str(exc)
            if "being read" in text:
                text = M.EXPORT_IS_INPUT.format(name=Path(path).name)
            self.say(text, 15000)
            self._warn("Not exported", text)
            return True
        return False

    def _ask_export_path(self, suggested: str, title: str, filt: str, kind: str) -> str:
        """Ask for an export file; never the review's own file (asked again if chosen)."""
        while True:
            path = self.ask_save_path(suggested, title, filt)
            if not path:
                return ""
            if kind != "figure" and not Path(path).suffix:
                path = str(Path(path).with_suffix("." + kind))
            k = Path(path).suffix.lower().lstrip(".") if kind == "figure" else kind
            if k not in ("png", "svg", "pdf"):
                return path  # the export itself says which suffixes it can write
            if not self._refuse_export(path, k):
                return path
            if _headless():
                return ""

    def _sheet_failed(self, worker, message: str) -> None:
        err = getattr(worker, "error", None)
        if isinstance(err, OutputLocked):
            # a PDF viewer holds the old sheet (Windows): offer a free name instead
            if self.ask_locked(str(err), err.suggestion.name):
                self.export_sheet(str(err.suggestion))
                return
            self.say(str(err), 0)
            return
        self.say(M.SHEET_FAILED.format(error=message), 0)

    def _sheet_done(self, path: str) -> None:
        self.say(M.SHEET_DONE.format(path=path))
        if self.ask_open_sheet(path):
            self.open_url(QUrl.fromLocalFile(path))

    def _current_figure_panel(self):
        w = self.views.currentWidget()
        return w if w in (self.funnel, self.forest, self.companions) else self.funnel

    def funnel_export_figure(self):
        """A fresh funnel Figure at the sheet's size (not the window's canvas size)."""
        if self.result is None:
            return None
        from ..figures.adaptors import funnel_input_from_result as adaptor
        from ..figures.funnel import funnel_figure

        opts = self.funnel.funnel_options(self.result)
        return funnel_figure(adaptor(self.result, opts), opts, size="page")

    def export_figure(self, path: str | None = None) -> bool:
        panel = self._current_figure_panel()
        if self.result is None:
            return False
        if path is None:
            path = self._ask_export_path(
                str(Path(self._own_folder()) / f"{panel.objectName().lower()}.png"),
                "Export the figure",
                "PNG image (*.png);;SVG drawing (*.svg);;PDF (*.pdf)",
                "figure",
            )
            if not path:
                return False
        else:
            kind = Path(path).suffix.lower().lstrip(".")
            if kind in ("png", "svg", "pdf") and self._refuse_export(path, kind):
                return False
        try:
            if panel is self.funnel:
                fig = self.funnel_export_figure()
            else:
                panel.show_result(self.result)
                panel.draw_now()
                fig = panel.figure
            if fig is None:
                return False
            from ..figures.export import figure_bytes, format_for
            from ..fileio import write_atomic

            write_atomic(path, figure_bytes(fig, format_for(path)))
        except (OSError, ValueError) as exc:
            self.say(M.SHEET_FAILED.format(error=plain(str(exc), str(path))))
            return False
        self.say(M.EXPORTED_FIGURE.format(path=path))
        return True

    def funnel_image(self, dpi: int = 200) -> QImage | None:
        from ..figures.export import figure_bytes

        fig = self.funnel_export_figure()
        if fig is None:
            return None
        img = QImage.fromData(QByteArray(figure_bytes(fig, "png", dpi=dpi)), "PNG")
        return None if img.isNull() else img

    def copy_funnel(self) -> bool:
        try:
            img = self.funnel_image()
        except (ImportError, ValueError) as exc:
            self.say(str(exc))
            return False
        if img is None:
            return False
        QGuiApplication.clipboard().setImage(img)
        self.say(M.COPIED_FUNNEL)
        return True

    def print_funnel(self, printer=None) -> bool:
        from PySide6.QtGui import QPainter
        from PySide6.QtPrintSupport import QPrintDialog, QPrinter

        if printer is None:
            printer = QPrinter(QPrinter.HighResolution)
            dlg = QPrintDialog(printer, self)
            if dlg.exec() != QPrintDialog.Accepted:
                return False
        img = self.funnel_image(dpi=300)
        if img is None:
            return False
        painter = QPainter(printer)
        try:
            rect = painter.viewport()
            size = img.size()
            size.scale(rect.size(), Qt.KeepAspectRatio)
            painter.setViewport(rect.x(), rect.y(), size.width(), size.height())
            painter.setWindow(img.rect())
            painter.drawImage(0, 0, img)
        finally:
            painter.end()
        return True

    # ------------------------------------------------------------------ help

    def show_guide(self) -> None:
        from .help import GuideDialog

        self.guide = GuideDialog(self)
        self.guide.show()

    def show_about(self) -> None:
        from .help import show_about

        show_about(self)

    # ------------------------------------------------------------------ closing

    def closeEvent(self, event) -> None:  # noqa: N802 - Qt API
        if not self._closing_ok and not self._maybe_save():
            event.ignore()
            return
        self.power.shutdown()
        if self.analysis_worker is not None and self.analysis_worker.isRunning():
            self.analysis_worker.wait(30000)
        if self.sheet_worker is not None and self.sheet_worker.isRunning():
            self.sheet_worker.wait(15000)
        self._save_prefs()
        if self.autosaver is not None:
            self.autosaver.close()
        event.accept()


def _headless() -> bool:
    return QApplication.platformName() in ("offscreen", "minimal")


def _in_samples(folder: str) -> bool:
    """True when ``folder`` is (inside) the folder of the bundled sample reviews."""
    from ..paths import sample_reviews

    try:
        samples = sample_reviews()
    except OSError:
        return False
    if not samples or not folder:
        return False
    here = os.path.normcase(os.path.realpath(folder))
    home = os.path.normcase(os.path.realpath(samples[0].parent))
    return here == home or here.startswith(home + os.sep)
