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

from collections.abc import Callable

from PySide6.QtCore import Qt, QTimer, QUrl, Signal
from PySide6.QtGui import QDesktopServices
from PySide6.QtWidgets import (
    QApplication,
    QLabel,
    QMainWindow,
    QMessageBox,
    QSplitter,
    QTabWidget,
    QVBoxLayout,
    QWidget,
)

from .. import edits as ed
from ..session import Session
from . import guards
from . import messages as M
from . import prefs as P
from .adjust_panel import AdjustPanel
from .adjust_panel import adjust_sections as _adjust_sections  # noqa: F401 - tests read it
from .autosave import Autosaver
from .causes import CausesPanel
from .details_form import DetailsForm
from .errors import details, plain
from .exports import ExportActions
from .file_actions import FileActions
from .funnel_panel import FunnelPanel
from .menus import MenuActions
from .outcomes import OutcomeBar
from .panel_view import PanelSummaryPanel
from .plots import CompanionPanel, ForestPanel
from .power_panel import PowerPanel
from .questions import (
    _ask_decimal,
    _ask_locked,
    _ask_measure,
    _ask_open_changed,
    _ask_open_path,
    _ask_open_sheet,
    _ask_recover,
    _ask_save_changes,
    _ask_save_failed,
    _ask_save_path,
    _headless,
)
from .screen_fit import keep_on_screen, place_window, screen_signature
from .sections import SectionsPanel
from .study_panel import StudyPanel
from .undo import EditStack
from .workers import AnalysisWorker, SheetWorker

DEBOUNCE_MS = 50


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


class MainWindow(MenuActions, FileActions, ExportActions, QMainWindow):
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
        self._build_layout()
        self._connect()
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

    def _build_layout(self) -> None:
        """The outcome chooser, the study table and details (left), the views (right)."""
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
        # above them: which outcome of the review they show
        self.outcomes = OutcomeBar(self.session, self.stack.push_edit)
        left_box = QWidget()
        left_lay = QVBoxLayout(left_box)
        left_lay.setContentsMargins(0, 0, 0, 0)
        left_lay.setSpacing(2)
        left_lay.addWidget(self.outcomes)
        left_lay.addWidget(self.left, 1)

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
        self.panel_view = PanelSummaryPanel(self.session)
        self.view_panels = (
            self.funnel,
            self.forest,
            self.companions,
            self.pooled,
            self.tests,
            self.adjust,
            self.causes,
            self.power,
            self.panel_view,
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
                "Panel",
            ),
        ):
            self.views.addTab(panel, title)
        self._stale: set = set(self.view_panels)

        self.split = QSplitter(Qt.Horizontal)
        self.split.addWidget(left_box)
        self.split.addWidget(self.views)
        self.split.setStretchFactor(0, 5)
        self.split.setStretchFactor(1, 6)
        self.split.setChildrenCollapsible(False)
        self.setCentralWidget(self.split)
        self.status_label = QLabel("")
        self.statusBar().addPermanentWidget(self.status_label)

    def _connect(self) -> None:
        """Updates after edits (debounced), and what each part tells the others."""
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
        self.outcomes.status.connect(self.say)
        self.outcomes.add_from_file_requested.connect(lambda: self.add_outcomes_from_file())
        self.panel_view.open_outcome.connect(self.open_outcome)
        self.panel_view.export_requested.connect(
            lambda what: self.export_panel() if what == "panel" else self.export_slide()
        )

    # ------------------------------------------------------------------ moving about

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

    def _warn(self, title: str, text: str) -> None:
        """A warning dialog after the current event (never in offscreen test runs)."""
        if _headless():
            return
        QTimer.singleShot(0, lambda: QMessageBox.warning(self, title, text))

    # ------------------------------------------------------------------ session events

    def _session_changed(self, change: ed.Change) -> None:
        self._stale.add(self.panel_view)  # any outcome may have changed
        if change.kind == "outcomes":
            self._refresh_panel(self.views.currentWidget())
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

    # ------------------------------------------------------------------ files

    # ------------------------------------------------------------------ exports

    def open_outcome(self, index: int) -> None:
        """Show outcome ``index`` (a click in the Panel view): its funnel."""
        self.session.select_outcome(index)
        self._show_view(self.view_panels.index(self.funnel))

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
        self.panel_view.shutdown()
        if self.analysis_worker is not None and self.analysis_worker.isRunning():
            self.analysis_worker.cancel()  # nobody will see its result
            self.analysis_worker.wait(30000)
        pdf = getattr(self, "pdf_worker", None)
        if pdf is not None and pdf.isRunning():
            pdf.cancel()  # stops after the page being read (intake.pdf.PAGE_SECONDS at most)
            pdf.wait(60000)
        if self.sheet_worker is not None and self.sheet_worker.isRunning():
            # the sheet the user asked for is finished, not cut off (nor its thread freed
            # while it runs, which aborts the program)
            self.sheet_worker.wait(120000)
        self._save_prefs()
        if self.autosaver is not None:
            self.autosaver.close()
        event.accept()
