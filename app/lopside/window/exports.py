"""Panel-summary and slide exports from the window (the formats are the core's own).

:func:`lopside.panel.export.write_panel` and :func:`lopside.panel.slide.write_slide` do the
writing; here the file name is asked, checked (never the review's own file, never a file
the dialog did not offer to replace) and the outcome is reported in the status bar.
"""

from __future__ import annotations

from pathlib import Path

from PySide6.QtCore import QByteArray, Qt, QUrl
from PySide6.QtGui import QGuiApplication, QImage
from PySide6.QtWidgets import (
    QApplication,
)

from ..fileio import KINDS, OutputLocked, OutputRefused, check_output, kind_for_suffix
from ..panel import panel_title
from ..panel.export import FORMATS
from . import messages as M
from .errors import plain
from .questions import _headless
from .workers import SheetWorker

PANEL_FILTER = "PDF (*.pdf);;Word document (*.docx);;Excel workbook (*.xlsx);;CSV (*.csv)"
SLIDE_FILTER = "PowerPoint slide (*.pptx);;PNG image (*.png)"
PANEL_KINDS = ("pdf", "docx", "xlsx", "results")
SLIDE_KINDS = ("pptx", "png")


def _checked(window, path: str, kinds: tuple[str, ...], default: str) -> Path | None:
    p = Path(path)
    if not p.suffix:
        p = p.with_suffix(default)
    kind = kind_for_suffix(p, kinds)
    try:
        if kind is None:
            suffixes = ", ".join(s for k in kinds for s in KINDS[k][0])
            raise OutputRefused(f"{p.name}: choose a file name ending in {suffixes}.")
        # the file dialog has already asked before replacing an existing file
        check_output(p, kind, window._inputs(), force=True)
    except OutputRefused as exc:
        text = str(exc)
        if "being read" in text:
            text = M.EXPORT_IS_INPUT.format(name=p.name)
        window.say(text, 15000)
        window._warn("Not exported", text)
        return None
    return p


def _ask(window, base: str, title: str, filt: str) -> str:
    return window.ask_save_path(str(Path(window._own_folder()) / base), title, filt)


def panel_to_file(window, path: str | None = None) -> Path | None:
    """Write the panel summary of every outcome (PDF, DOCX, XLSX or CSV)."""
    from ..panel import build_panel
    from ..panel.export import write_panel

    stem = window.session.path.stem if window.session.path else "review"
    path = path or _ask(window, f"{stem}-panel.pdf", "Export the panel summary", PANEL_FILTER)
    if not path:
        return None
    out = _checked(window, path, PANEL_KINDS, ".pdf")
    if out is None or out.suffix.lower() not in FORMATS:
        return None
    QApplication.setOverrideCursor(Qt.WaitCursor)
    try:
        title = panel_title([window.session.review.details.title])
        write_panel(build_panel(title, window.panel_view.inputs()), out)
    except (OSError, ValueError) as exc:
        window.say(M.PANEL_EXPORT_FAILED.format(error=exc), 0)
        return None
    finally:
        QApplication.restoreOverrideCursor()
    window.say(M.PANEL_EXPORTED.format(path=out))
    return out


def slide_to_file(window, path: str | None = None) -> Path | None:
    """One journal-club slide of the outcome shown (PPTX or PNG)."""
    from ..assessment import assessment_of
    from ..panel.slide import write_slide

    result = window.full_result()
    if result is None or result.k == 0:
        window.say(M.SLIDE_FAILED.format(error=window.analysis_error or M.NO_ANALYSIS))
        return None
    stem = window.session.path.stem if window.session.path else "review"
    path = path or _ask(window, f"{stem}-slide.pptx", "Export a journal-club slide", SLIDE_FILTER)
    if not path:
        return None
    out = _checked(window, path, SLIDE_KINDS, ".pptx")
    if out is None:
        return None
    s = window.session
    name = s.outcome_names[s.outcome_index]
    try:
        write_slide(result, assessment_of(result).appraisal, out, title=name)
    except (OSError, ValueError) as exc:
        window.say(M.SLIDE_FAILED.format(error=exc), 0)
        return None
    window.say(M.SLIDE_EXPORTED.format(path=out))
    return out


#: how long an export waits for the worker's full stage before computing it itself (ms)
FULL_STAGE_WAIT_MS = 120_000


class ExportActions:
    """The main window's exports (a mixin: ``self`` is the window): the sheet, figures,
    the funnel as an image or on paper, the panel summary and the slide."""

    def full_result(self):
        """The full analysis of the review shown, for an export: an edit's core stage
        (drawn at once, its other numbers "updating…") is never what goes on paper. Waits
        for the worker's full stage when it is under way; computes it here when the
        worker did not deliver it (cancelled, failed). None when there is no analysis."""
        w = self.analysis_worker
        busy = w is not None and (w.isRunning() or getattr(self, "_worker_starting", False))
        if busy or getattr(self, "_awaiting_full", False):
            self.say(M.EXPORT_WAITS, 0)
            QApplication.setOverrideCursor(Qt.WaitCursor)
            try:
                self.wait_for_analysis(timeout_ms=FULL_STAGE_WAIT_MS)
            finally:
                QApplication.restoreOverrideCursor()
                if self.statusBar().currentMessage() == M.EXPORT_WAITS:
                    self.statusBar().clearMessage()  # done waiting (the export says the rest)
        self.update_views()
        result = self.result
        if result is not None and result.stage != "full":
            try:
                result = self.session.analyse()  # cached, or the full analysis now
            except Exception as exc:  # noqa: BLE001 - said to the user, as update_views does
                self.analysis_error = M.ANALYSIS_FAILED.format(error=plain(str(exc)))
                return None
        return result

    def _say_nothing_to_export(self) -> None:
        """A figure export with no analysis to draw: why, in the status bar (it returned
        without a word)."""
        self.say(M.NOTHING_TO_EXPORT.format(why=self.analysis_error or M.NO_ANALYSIS), 0)

    def export_sheet(self, path: str | None = None) -> SheetWorker | None:
        """Write the PDF sheet in a worker; returns the worker (started)."""
        self.causes.flush()
        result = self.full_result()
        if result is None:
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
        w = SheetWorker(result, path, parent=self)
        w.finished_with.connect(self._sheet_done)
        w.failed.connect(lambda msg: self._sheet_failed(w, msg))
        self.sheet_worker = w
        self.say("Writing the appraisal sheet\u2026", 0)
        w.start()
        return w

    def export_panel(self, path: str | None = None):
        """Write the panel summary of every outcome (see window/exports.py)."""
        return panel_to_file(self, path)

    def export_slide(self, path: str | None = None):
        """One journal-club slide of the outcome shown (see window/exports.py)."""
        return slide_to_file(self, path)

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
        """A fresh funnel Figure at the sheet's size (not the window's canvas size), of
        the full analysis (the adjusted estimates the funnel can show come with it)."""
        result = self.full_result()
        if result is None:
            return None
        from ..figures.adaptors import funnel_input_from_result as adaptor
        from ..figures.funnel import funnel_figure

        opts = self.funnel.funnel_options(result)
        return funnel_figure(adaptor(result, opts), opts, size="page")

    def export_figure(self, path: str | None = None) -> bool:
        panel = self._current_figure_panel()
        result = self.full_result()
        if result is None:
            self._say_nothing_to_export()
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
                panel.show_result(result)
                panel.draw_now()
                fig = panel.figure
            if fig is None:
                return False
            from ..figures.export import figure_bytes, format_for
            from ..fileio import write_atomic

            write_atomic(path, figure_bytes(fig, format_for(path)))
        except (OSError, ValueError) as exc:
            self.say(M.FIGURE_FAILED.format(error=plain(str(exc), str(path))), 0)
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
            self._say_nothing_to_export()
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
            self._say_nothing_to_export()
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
