"""The recovery question: every autosave found, restore any or all, discard only on request."""

from __future__ import annotations

import os

from PySide6.QtCore import Qt
from PySide6.QtWidgets import (
    QDialog,
    QDialogButtonBox,
    QLabel,
    QMessageBox,
    QPushButton,
    QTreeWidget,
    QTreeWidgetItem,
    QVBoxLayout,
)

from . import messages as M
from .autosave import Recoverable, RecoveryChoice

COLUMNS = ("Review", "File", "Last edit", "Studies")


def describe(r: Recoverable) -> tuple[str, str, str, str]:
    """The four cells of one autosave: title, file, time of last edit, number of studies."""
    title = r.title or r.name or "Untitled review"
    file = os.path.basename(r.original) if r.original else "(never saved)"
    when = r.when() + (f" on {r.host}" if r.host else "")
    studies = "?" if r.studies is None else str(r.studies)
    return title, file, when, studies


class RecoveryDialog(QDialog):
    """Lists every autosave with a tick box; Restore / Decide later / Discard."""

    def __init__(self, items: list[Recoverable], parent=None) -> None:
        super().__init__(parent)
        self.setWindowTitle(M.RECOVER_TITLE)
        self.items = items
        self.choice = RecoveryChoice()
        lay = QVBoxLayout(self)
        intro = QLabel(M.RECOVER_INTRO)
        intro.setWordWrap(True)
        lay.addWidget(intro)
        self.tree = QTreeWidget()
        self.tree.setHeaderLabels(list(COLUMNS))
        self.tree.setRootIsDecorated(False)
        self.tree.setAccessibleName("Autosaved reviews")
        for r in items:
            it = QTreeWidgetItem(list(describe(r)))
            it.setCheckState(0, Qt.Checked)
            it.setToolTip(0, str(r.review_file))
            self.tree.addTopLevelItem(it)
        for c in range(len(COLUMNS)):
            self.tree.resizeColumnToContents(c)
        lay.addWidget(self.tree, 1)
        buttons = QDialogButtonBox()
        self.restore_button = QPushButton("&Restore the ticked")
        self.later_button = QPushButton("Decide &later")
        self.discard_button = QPushButton("&Discard the ticked\u2026")
        buttons.addButton(self.restore_button, QDialogButtonBox.AcceptRole)
        buttons.addButton(self.later_button, QDialogButtonBox.RejectRole)
        buttons.addButton(self.discard_button, QDialogButtonBox.DestructiveRole)
        self.restore_button.clicked.connect(self._restore)
        self.later_button.clicked.connect(self.reject)
        self.discard_button.clicked.connect(self._discard)
        lay.addWidget(buttons)
        self.resize(720, 320)

    def ticked(self) -> list[Recoverable]:
        return [
            r
            for i, r in enumerate(self.items)
            if self.tree.topLevelItem(i).checkState(0) == Qt.Checked
        ]

    def _restore(self) -> None:
        self.choice = RecoveryChoice(restore=self.ticked())
        self.accept()

    def _discard(self) -> None:
        chosen = self.ticked()
        if not chosen:
            return
        answer = QMessageBox.question(
            self,
            M.RECOVER_TITLE,
            M.RECOVER_DISCARD_CONFIRM,
            QMessageBox.Discard | QMessageBox.Cancel,
            QMessageBox.Cancel,
        )
        if answer == QMessageBox.Discard:
            self.choice = RecoveryChoice(discard=chosen)
            self.accept()


def ask_recover(parent, items: list[Recoverable]) -> RecoveryChoice:
    dlg = RecoveryDialog(items, parent)
    dlg.exec()
    return dlg.choice
