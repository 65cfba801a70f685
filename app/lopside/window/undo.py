"""One QUndoCommand over the pure edits, mirroring the session's own history.

The session's history is the authority (scripts and tests use it without Qt); the
QUndoStack is its face in the window (menu texts, clean state, macros). A command's first
``redo`` is ``session.do(edit)``; later redos/undos are ``session.redo()``/``undo()``, which
replay the same steps in the same order because QUndoStack is LIFO too. Merging follows
the session: ``mergeWith`` says yes exactly when the session merged the edit.
"""

from __future__ import annotations

from PySide6.QtCore import Signal
from PySide6.QtGui import QUndoCommand, QUndoStack

from .. import edits as ed
from ..model.workbook import WorkbookError
from ..session import Session


class EditCommand(QUndoCommand):
    """Redo applies the edit (keeping its inverse in the session); undo applies the inverse."""

    def __init__(self, session: Session, edit: ed.Edit) -> None:
        super().__init__(ed.describe(edit))
        self.session = session
        self.edit = edit
        self._first = True
        self.merged = False
        self.error = ""

    def id(self) -> int:  # noqa: A003 - Qt API
        return ed.MERGE_IDS.get(type(self.edit), -1)

    def redo(self) -> None:
        if self._first:
            self._first = False
            try:
                self.merged = self.session.do(self.edit)
            except (ed.EditError, WorkbookError) as exc:
                self.error = str(exc)
                self.setObsolete(True)  # QUndoStack drops an obsolete command at once
        else:
            self.session.redo()

    def undo(self) -> None:
        self.session.undo()

    def mergeWith(self, other: QUndoCommand) -> bool:  # noqa: N802 - Qt API
        if isinstance(other, EditCommand) and other.merged:
            self.edit = other.edit
            self.setText(ed.describe(other.edit))
            return True
        return False


class EditStack(QUndoStack):
    """The window's undo stack; ``push_edit`` is how every view changes the review.

    ``refused(message)`` is emitted when an edit does not fit (nothing changed), so the
    window can say why.
    """

    refused = Signal(str)

    def __init__(self, session: Session, parent=None) -> None:
        super().__init__(parent)
        self.session = session
        self.last_error = ""

    def push_edit(self, edit: ed.Edit) -> bool:
        """Apply ``edit`` as an undo step; False (nothing changed) when it does not fit."""
        cmd = EditCommand(self.session, edit)
        self.push(cmd)
        self.last_error = cmd.error
        if cmd.error:
            self.refused.emit(cmd.error)
        return not cmd.error

    def push_many(self, label: str, edits: list[ed.Edit]) -> bool:
        """Several edits as ONE undo step (a paste that also sets the published result)."""
        self.beginMacro(label)
        ok = True
        try:
            for e in edits:
                ok = self.push_edit(e) and ok
        finally:
            self.endMacro()
            self.session.break_merge()  # the stack will not merge into a macro either
        return ok

    def mark_clean(self) -> None:
        self.setClean()
        self.session.break_merge()

    def reset(self) -> None:
        """Forget the history (after New/Open/recovery; the session cleared its own)."""
        self.clear()
