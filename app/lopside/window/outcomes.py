"""The outcomes of the workbook: a chooser above the study table and the Outcome menu.

Choosing an outcome makes every view show it; adding, renaming, duplicating, moving and
deleting outcomes are undo steps like any edit (:mod:`lopside.workbook_edits`), so a
deleted outcome comes back with Undo and nothing asks "are you sure?". Arranges and
forwards only: the session does the work.
"""

from __future__ import annotations

from collections.abc import Callable

from PySide6.QtCore import Qt, Signal
from PySide6.QtGui import QAction, QKeySequence
from PySide6.QtWidgets import (
    QComboBox,
    QHBoxLayout,
    QInputDialog,
    QLabel,
    QMenu,
    QToolButton,
    QWidget,
)

from .. import edits as ed
from .. import workbook_edits as wbe
from ..model.workbook import STUDY_IDENTITY
from ..session import Session
from . import messages as M


def _ask_name(parent, title: str, label: str, text: str) -> str | None:
    name, ok = QInputDialog.getText(parent, title, label, text=text)
    return name if ok else None


class OutcomeBar(QWidget):
    """ "Outcome: [chooser] [Outcomes ▾]" — which outcome the views show, and its actions.

    ``ask_name(title, label, text)`` returns the typed name or None (tests replace it).
    ``status(text)`` is emitted with what happened (the window's status bar).
    """

    status = Signal(str)
    #: "Add outcomes from a file…": the window asks for the file and reads it
    add_from_file_requested = Signal()

    def __init__(
        self,
        session: Session,
        push_edit: Callable[[ed.Edit], bool],
        parent=None,
        ask_name: Callable[[str, str, str], str | None] | None = None,
    ) -> None:
        super().__init__(parent)
        self.setObjectName("outcomes")
        self.session = session
        self.push_edit = push_edit
        self.ask_name = ask_name or (lambda t, lab, text: _ask_name(self, t, lab, text))
        lay = QHBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        label = QLabel("Outcome:")
        self.chooser = QComboBox()
        self.chooser.setAccessibleName("Outcome shown")
        self.chooser.setToolTip(M.OUTCOME_TIP)
        self.chooser.setSizeAdjustPolicy(QComboBox.AdjustToMinimumContentsLengthWithIcon)
        self.chooser.setMinimumContentsLength(16)
        label.setBuddy(self.chooser)
        self.count = QLabel("")
        self.more = QToolButton()
        self.more.setText("Outcomes")
        self.more.setAccessibleName("Outcome actions")
        self.more.setPopupMode(QToolButton.InstantPopup)
        self.menu = QMenu("&Outcome", self)
        self._build_actions()
        self.more.setMenu(self.menu)
        lay.addWidget(label)
        lay.addWidget(self.chooser, 1)
        lay.addWidget(self.count)
        lay.addWidget(self.more)
        self._names: tuple[str, ...] = ()
        self.chooser.activated.connect(self.choose)
        self.session.add_listener(changed=lambda _c: self.refresh())
        self.refresh()

    # ------------------------------------------------------------------ actions

    def _action(self, text: str, slot, shortcut=None) -> QAction:
        a = QAction(text, self)
        if shortcut is not None:
            a.setShortcut(QKeySequence(shortcut))
        a.triggered.connect(lambda _checked=False: slot())
        self.menu.addAction(a)
        return a

    def _build_actions(self) -> None:
        self.act_add = self._action("&New outcome\u2026", self.add)
        self.act_add_file = self._action(
            "Add outcomes from a &file\u2026", lambda: self.add_from_file_requested.emit()
        )
        self.act_rename = self._action("&Rename this outcome\u2026", self.rename)
        self.act_duplicate = self._action("&Duplicate this outcome", self.duplicate)
        self.act_up = self._action("Move &up", lambda: self.move(-1))
        self.act_down = self._action("Move do&wn", lambda: self.move(1))
        self.act_delete = self._action("De&lete this outcome", self.delete)
        self.menu.addSeparator()
        self.copy_menu = self.menu.addMenu("&Copy studies from")
        self.copy_menu.aboutToShow.connect(self._fill_copy_menu)
        self.menu.addSeparator()
        self.act_next = self._action("Ne&xt outcome", lambda: self.step(1), "Ctrl+PgDown")
        self.act_prev = self._action("Pre&vious outcome", lambda: self.step(-1), "Ctrl+PgUp")

    def refresh(self) -> None:
        names = self.session.outcome_names
        at = self.session.outcome_index
        if names != self._names:
            self._names = names
            self.chooser.blockSignals(True)
            self.chooser.clear()
            for i, n in enumerate(names):
                self.chooser.addItem(f"{i + 1}. {n}")
                self.chooser.setItemData(i, n, Qt.ToolTipRole)
            self.chooser.blockSignals(False)
        if self.chooser.currentIndex() != at:
            self.chooser.blockSignals(True)
            self.chooser.setCurrentIndex(at)
            self.chooser.blockSignals(False)
        n = len(names)
        self.count.setText(f"of {n}" if n > 1 else "")
        self.act_delete.setEnabled(n > 1)
        self.act_up.setEnabled(at > 0)
        self.act_down.setEnabled(at < n - 1)
        self.act_next.setEnabled(n > 1)
        self.act_prev.setEnabled(n > 1)
        self.copy_menu.setEnabled(n > 1)

    def choose(self, index: int) -> None:
        if 0 <= index < len(self._names):
            self.session.select_outcome(index)

    def step(self, by: int) -> None:
        n = len(self._names)
        if n > 1:
            self.choose((self.session.outcome_index + by) % n)

    def add(self) -> bool:
        name = self.ask_name(M.OUTCOME_NEW_TITLE, M.OUTCOME_NAME_LABEL, "")
        if name is None:
            return False
        slot = self.session.new_outcome_slot(name.strip())
        if self.push_edit(wbe.AddOutcome(len(self._names), slot)):
            self.status.emit(M.OUTCOME_ADDED.format(name=slot.review.details.outcome))
            return True
        return False

    def rename(self) -> bool:
        at = self.session.outcome_index
        name = self.ask_name(M.OUTCOME_RENAME_TITLE, M.OUTCOME_NAME_LABEL, self._names[at])
        if name is None or name.strip() == self._names[at]:
            return False
        return self.push_edit(wbe.RenameOutcome(at, name))

    def duplicate(self) -> bool:
        at = self.session.outcome_index
        return self.push_edit(wbe.AddOutcome(at + 1, self.session.duplicate_slot(at)))

    def move(self, by: int) -> bool:
        at = self.session.outcome_index
        to = at + by
        if not 0 <= to < len(self._names):
            return False
        return self.push_edit(wbe.MoveOutcome(at, to))

    def delete(self) -> bool:
        at = self.session.outcome_index
        name = self._names[at]
        if self.push_edit(wbe.DeleteOutcome(at)):
            self.status.emit(M.OUTCOME_DELETED.format(name=name))
            return True
        return False

    def _fill_copy_menu(self) -> None:
        self.copy_menu.clear()
        at = self.session.outcome_index
        for i, n in enumerate(self._names):
            if i == at:
                continue
            a = self.copy_menu.addAction(f"{i + 1}. {n}")
            a.triggered.connect(lambda _c=False, i=i: self.copy_studies_from(i))

    def copy_studies_from(self, source: int) -> bool:
        """Add the studies of outcome ``source`` (name, year, risk of bias, subgroup) to
        this outcome's table; their numbers belong to the other outcome and are typed."""
        reviews = self.session.outcome_reviews()
        studies = reviews[source][0].studies
        if not studies:
            self.status.emit(M.OUTCOME_NO_STUDIES.format(name=self._names[source]))
            return False
        rows = tuple(type(s)(**{f: getattr(s, f) for f in STUDY_IDENTITY}) for s in studies)
        at = len(self.session.review.studies)
        if self.push_edit(ed.AddRows(at, rows)):
            self.status.emit(M.OUTCOME_COPIED.format(n=len(rows), name=self._names[source]))
            return True
        return False
