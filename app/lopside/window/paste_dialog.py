"""Paste rows from a paper: a preview of how each line was read, then one undoable insert."""

from __future__ import annotations

from PySide6.QtCore import Qt, QTimer
from PySide6.QtGui import QBrush, QColor
from PySide6.QtWidgets import (
    QAbstractItemView,
    QCheckBox,
    QDialog,
    QDialogButtonBox,
    QHeaderView,
    QLabel,
    QPlainTextEdit,
    QSplitter,
    QTableWidget,
    QTableWidgetItem,
    QVBoxLayout,
)

from ..model.review import MEASURE_NAMES
from . import messages as M

STATUS_COLOURS = {
    "study": QColor("#E3F2EF"),
    "skipped": QColor("#EEF1F4"),
    "not understood": QColor("#F7C9C3"),
}


class PasteDialog(QDialog):
    """Reads the pasted text with ``lopside.intake.paste.read_pasted`` as the user types.

    After ``accept()``, :attr:`reading` holds the PasteResult and :meth:`chosen` says
    whether to also take the measure and published result the paste names.
    """

    def __init__(self, measure: str, text: str = "", parent=None) -> None:
        super().__init__(parent)
        self.setWindowTitle(M.PASTE_TITLE)
        self.measure = measure
        self.reading = None
        self.resize(980, 600)
        lay = QVBoxLayout(self)
        help_ = QLabel(M.PASTE_HELP)
        help_.setWordWrap(True)
        lay.addWidget(help_)
        split = QSplitter(Qt.Vertical)
        self.text = QPlainTextEdit()
        self.text.setAccessibleName("Pasted rows")
        self.text.setPlaceholderText("Smith 2004    12/140   20/138   0.58 (0.29 to 1.15)")
        self.text.setLineWrapMode(QPlainTextEdit.NoWrap)
        split.addWidget(self.text)
        self.preview = QTableWidget(0, 4)
        self.preview.setHorizontalHeaderLabels(["Line", "Read as", "How it was read", "Text"])
        self.preview.setAccessibleName("How each line was read")
        self.preview.verticalHeader().setVisible(False)
        self.preview.setEditTriggers(QAbstractItemView.NoEditTriggers)
        self.preview.setWordWrap(True)
        h = self.preview.horizontalHeader()
        h.setSectionResizeMode(0, QHeaderView.ResizeToContents)
        h.setSectionResizeMode(1, QHeaderView.ResizeToContents)
        h.setSectionResizeMode(2, QHeaderView.Stretch)
        h.setSectionResizeMode(3, QHeaderView.Interactive)
        self.preview.setColumnWidth(3, 260)
        split.addWidget(self.preview)
        split.setSizes([200, 330])
        lay.addWidget(split, 1)
        self.summary = QLabel(M.PASTE_NOTHING)
        self.summary.setWordWrap(True)
        lay.addWidget(self.summary)
        self.take_measure = QCheckBox()
        self.take_published = QCheckBox()
        for cb in (self.take_measure, self.take_published):
            cb.setVisible(False)
            cb.setChecked(True)
            lay.addWidget(cb)
        self.buttons = QDialogButtonBox(QDialogButtonBox.Ok | QDialogButtonBox.Cancel)
        self.ok_button = self.buttons.button(QDialogButtonBox.Ok)
        self.ok_button.setEnabled(False)
        self.buttons.accepted.connect(self.accept)
        self.buttons.rejected.connect(self.reject)
        lay.addWidget(self.buttons)
        self._timer = QTimer(self)
        self._timer.setSingleShot(True)
        self._timer.setInterval(120)
        self._timer.timeout.connect(self.read_now)
        self.text.textChanged.connect(self._timer.start)
        if text:
            self.text.setPlainText(text)
            self.read_now()

    def read_now(self) -> None:
        """Read the text and show the preview (also called by tests)."""
        from ..intake.paste import read_pasted

        self._timer.stop()
        r = read_pasted(self.text.toPlainText(), self.measure)
        self.reading = r
        self.preview.setRowCount(len(r.lines))
        for i, line in enumerate(r.lines):
            if line.status == "study":
                how = line.account
            elif line.status == "skipped":
                how = f"Skipped: {line.reason}"
            else:
                how = f"Not understood: {line.reason}. {line.advice}".strip()
            cells = (str(line.line_no), line.status, how, line.text.strip())
            for c, value in enumerate(cells):
                item = QTableWidgetItem(value)
                item.setBackground(QBrush(STATUS_COLOURS.get(line.status, QColor("white"))))
                if c == 2:
                    item.setToolTip(how)
                self.preview.setItem(i, c, item)
        self.preview.resizeRowsToContents()
        n = len(r.rows)
        self.summary.setText(
            M.PASTE_COUNT.format(
                n_study=len(r.studies), n_skip=len(r.skipped), n_nu=len(r.not_understood)
            )
            if r.lines
            else M.PASTE_NOTHING
        )
        self.ok_button.setEnabled(n > 0)
        self.ok_button.setText(f"&Add {n} stud{'y' if n == 1 else 'ies'}" if n else "&Add")
        hint = r.measure_hint
        self.take_measure.setVisible(bool(hint and hint != self.measure))
        if hint:
            self.take_measure.setText(
                f"Set the review's measure to {MEASURE_NAMES.get(hint, hint)} ({hint}), "
                "as the pasted header says"
            )
        pub = r.published
        self.take_published.setVisible(pub is not None)
        if pub is not None:
            self.take_published.setText(
                f"Also enter the pooled result printed on the Total line: "
                f"{pub.estimate:g} ({pub.lower:g} to {pub.upper:g})"
            )

    def rows(self):
        return self.reading.rows if self.reading is not None else ()

    def chosen_measure(self) -> str | None:
        r = self.reading
        if r is None or not r.measure_hint or r.measure_hint == self.measure:
            return None
        return r.measure_hint if self.take_measure.isChecked() else None

    def chosen_published(self):
        r = self.reading
        if r is None or r.published is None or not self.take_published.isChecked():
            return None
        return r.published
