"""The main window's file actions: new, open (projects, tables, pasted rows, PDFs),
save, drag and drop, paste, and recovery of autosaved work.

A mixin of :class:`lopside.window.main_window.MainWindow` (``self`` is the window).
Nothing the user made is changed without being asked (see main_window's invariants).
"""

from __future__ import annotations

import os
from pathlib import Path

from PySide6.QtCore import QPoint, Qt, QTimer
from PySide6.QtGui import QGuiApplication

from .. import edits as ed
from ..fileio import OutputRefused, check_output
from ..model.project_file import SUFFIX, ChangedOutside
from . import messages as M
from . import prefs as P
from .autosave import Recoverable, as_choice, find_recoverable
from .errors import details, plain, show_error
from .paste_dialog import PasteDialog
from .questions import ACCEPTED_SUFFIXES, _headless, _in_samples


class FileActions:
    """Methods of the main window (see the module docstring)."""

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

    def spawn_window(self):
        """A new window with the same questions (for a second restored review)."""
        w = type(self)(**self._window_kwargs)
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
                book = project_file.load_workbook(item.review_file)
            except project_file.ChangedOutside as exc:
                # never silent: restored (it is all there is of that work), and said so
                book = exc.workbook
                changed = " " + M.RECOVERED_CHANGED
            review = book.outcomes[0].review
            settings = AnalysisSettings.from_dict(book.outcomes[0].settings)
        except (OSError, ValueError) as exc:
            msg = M.RECOVER_FAILED.format(name=item.name, error=exc, path=item.review_file)
            self.say(msg, 0)
            self._warn(M.RECOVER_TITLE, msg)
            return False
        read_only = item.read_only
        if item.original and _in_samples(os.path.dirname(item.original)):
            read_only = read_only or M.READ_ONLY_SAMPLE
        self.session.reset(
            review, settings, item.original or None, dirty=True, read_only=read_only, workbook=book
        )
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
        if ask and not self._maybe_save():
            return False
        p = Path(path)
        if p.suffix.lower() == ".pdf":
            return self.open_pdf(p)
        read_only = self._read_into(self.session, p, read_only)
        if read_only is None:
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

    def _read_into(self, session, p: Path, read_only: str = "") -> str | None:
        """``session.open(p)``, asking what the file does not settle (changed outside
        Lopside? which measure? which decimal mark?). Returns the read-only reason ("" for
        none), or None when the file was not opened (the user was told why)."""
        from ..cli_common import INPUT_ERRORS, DecimalUndecided

        measure = None
        decimal = None
        accept_changed = False
        for _attempt in range(4):
            try:
                session.open(
                    p, measure, decimal, accept_changed=accept_changed, read_only=read_only
                )
                return read_only
            except ChangedOutside:
                if accept_changed or not self.ask_open_changed(p.name):
                    self.say(M.OPEN_FAILED.format(name=p.name, error=M.READ_ONLY_CHANGED))
                    return None
                accept_changed = True
                read_only = read_only or M.READ_ONLY_CHANGED
                continue
            except DecimalUndecided as exc:
                decimal = self.ask_decimal(p.name, exc.examples) if decimal is None else None
                if decimal:
                    continue
                self._open_failed(p, exc)
                return None
            except INPUT_ERRORS as exc:
                if measure is None and "measure" in str(exc) and p.suffix.lower() != SUFFIX:
                    measure = self.ask_measure(p.name)
                    if measure:
                        continue
                self._open_failed(p, exc)
                return None
            except (OSError, ValueError) as exc:
                self._open_failed(p, exc)
                return None
        return None

    def add_outcomes_from_file(self, path=None) -> bool:
        """Add the outcome(s) of a study table, pasted .txt or project to this workbook
        (one undo step), each named by its file or its own name."""
        from .. import workbook_edits as wbe
        from ..session import Session

        if path is None:
            path = self.ask_open_path(self.prefs.get(P.LAST_FOLDER) or str(Path.home()))
            if not path:
                return False
        p = Path(path)
        if p.suffix.lower() == ".pdf":
            self.say(M.OUTCOME_FROM_PDF, 15000)
            return False
        other = Session()
        if self._read_into(other, p) is None:
            return False
        book = other.workbook
        names = book.names if p.suffix.lower() in (SUFFIX, ".json") and len(book) > 1 else (p.stem,)
        edits = []
        for name, outcome in zip(names, book.outcomes):
            slot = self.session.new_outcome_slot(name, outcome.review)
            at = len(self.session.outcome_names) + len(edits)
            edits.append(wbe.AddOutcome(at, slot))
        if not self.stack.push_many(M.OUTCOME_FROM_FILE_STEP.format(name=p.name), edits):
            return False
        self.say(M.OUTCOME_FROM_FILE.format(n=len(edits), name=p.name))
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
        paths = [Path(u.toLocalFile()) for u in event.mimeData().urls() if u.isLocalFile()]
        accepted = [p for p in paths if p.suffix.lower() in ACCEPTED_SUFFIXES]
        if not accepted:
            return
        event.acceptProposedAction()
        first, others = accepted[0], [p.name for p in paths if p != accepted[0]]

        def open_first() -> None:
            opened = self.open_path(first)
            if opened and others:
                # one review is opened at a time: the rest of the drop is said, not lost
                self.say(M.DROPPED_OTHERS.format(name=first.name, others=", ".join(others)), 0)

        QTimer.singleShot(0, open_first)
