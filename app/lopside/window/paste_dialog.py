"""Paste rows from a paper: a preview of how each line was read, then one undoable insert.

The preview says which measure it assumes and why, with a chooser (the guess is a
suggestion the user confirms), and asks once for the decimal mark when nothing in the
paste settles it, showing both readings side by side (issue 12).
"""

from __future__ import annotations

from PySide6.QtCore import Qt, QTimer
from PySide6.QtGui import QBrush, QColor
from PySide6.QtWidgets import (
    QAbstractItemView,
    QButtonGroup,
    QCheckBox,
    QComboBox,
    QDialog,
    QDialogButtonBox,
    QFrame,
    QHBoxLayout,
    QHeaderView,
    QLabel,
    QPlainTextEdit,
    QRadioButton,
    QSplitter,
    QTableWidget,
    QTableWidgetItem,
    QVBoxLayout,
)

from ..model.review import MEASURE_NAMES, MEASURES
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

    def __init__(self, measure: str, text: str = "", parent=None, *, empty: bool = True) -> None:
        super().__init__(parent)
        self.setWindowTitle(M.PASTE_TITLE)
        #: the review's measure; ``empty`` says the review has no rows yet
        self.measure = measure
        self.review_empty = empty
        self.reading = None
        #: the decimal mark the user chose for numbers the paste does not settle
        self.decimal: str | None = None
        self._measure_touched = False
        #: (file name, PdfRows, unread pages) when the text came from a PDF (set_origin)
        self._origin = None
        self.resize(980, 600)
        lay = QVBoxLayout(self)
        help_ = QLabel(M.PASTE_HELP)
        help_.setWordWrap(True)
        lay.addWidget(help_)
        mrow = QHBoxLayout()
        mrow.addWidget(QLabel("&Measure of the pasted rows:"))
        self.measure_box = QComboBox()
        self.measure_box.setAccessibleName("Measure of the pasted rows")
        for m in MEASURES:
            self.measure_box.addItem(f"{MEASURE_NAMES[m]} ({m})", m)
        self.measure_box.setCurrentIndex(MEASURES.index(measure) if measure in MEASURES else 0)
        mrow.itemAt(0).widget().setBuddy(self.measure_box)
        mrow.addWidget(self.measure_box)
        self.measure_why = QLabel("")
        self.measure_why.setWordWrap(True)
        self.measure_why.setAccessibleName("Why this measure")
        mrow.addWidget(self.measure_why, 1)
        lay.addLayout(mrow)
        self.measure_box.activated.connect(self._measure_chosen)
        # the decimal question, shown only when the paste cannot settle the mark
        self.decimal_frame = QFrame()
        self.decimal_frame.setFrameShape(QFrame.StyledPanel)
        dl = QHBoxLayout(self.decimal_frame)
        self.decimal_question = QLabel("")
        self.decimal_question.setWordWrap(True)
        dl.addWidget(self.decimal_question, 1)
        self.decimal_point = QRadioButton()
        self.decimal_comma = QRadioButton()
        self.decimal_group = QButtonGroup(self)
        for b in (self.decimal_point, self.decimal_comma):
            self.decimal_group.addButton(b)
            dl.addWidget(b)
        self.decimal_point.toggled.connect(lambda on: on and self._decimal_chosen("point"))
        self.decimal_comma.toggled.connect(lambda on: on and self._decimal_chosen("comma"))
        self.decimal_frame.setVisible(False)
        lay.addWidget(self.decimal_frame)
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
        self.take_published = QCheckBox()
        self.take_published.setVisible(False)
        self.take_published.setChecked(True)
        lay.addWidget(self.take_published)
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
        self._decimal_example = ""
        if text:
            self.text.setPlainText(text)
            self.read_now()

    def read_now(self) -> None:
        """Read the text and show the preview (also called by tests)."""
        from ..intake.paste import read_pasted

        self._timer.stop()
        text = self.text.toPlainText()
        m = self.measure_box.currentData()
        r = read_pasted(text, m, self.decimal)
        guess = r.measure_guess
        if (
            not self._measure_touched
            and guess
            and guess != m
            and (r.measure_hint or self.review_empty)
        ):
            # a suggestion: the chooser moves to it, the user confirms or changes it
            self.measure_box.setCurrentIndex(MEASURES.index(guess))
            r = read_pasted(text, guess, self.decimal)
        self.reading = r
        self._show_measure_why(r)
        self._show_decimal_question(r)
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
        self.ok_button.setEnabled(n > 0 and not (r.undecided and self.decimal is None))
        self.ok_button.setText(f"&Add {n} stud{'y' if n == 1 else 'ies'}" if n else "&Add")
        pub = r.published
        self.take_published.setVisible(pub is not None)
        if pub is not None:
            self.take_published.setText(
                f"Also enter the pooled result printed on the Total line: "
                f"{pub.estimate:g} ({pub.lower:g} to {pub.upper:g})"
            )

    # ------------------------------------------------------------- measure and decimal

    def _measure_chosen(self, _index: int) -> None:
        self._measure_touched = True
        self.read_now()

    def _show_measure_why(self, r) -> None:
        m = self.measure_box.currentData()
        if r.measure_guess == m and r.measure_why:
            text = M.PASTE_MEASURE_WHY.format(why=r.measure_why)
        elif r.measure_guess and r.measure_why:
            text = M.PASTE_MEASURE_OTHER.format(
                guess=MEASURE_NAMES[r.measure_guess], why=r.measure_why
            )
        else:
            text = M.PASTE_MEASURE_REVIEW
        if m != self.measure and not self.review_empty:
            text += " " + M.PASTE_MEASURE_CHANGES.format(name=MEASURE_NAMES[m])
        self.measure_why.setText(text)

    def _show_decimal_question(self, r) -> None:
        show = bool(r.undecided) or self.decimal is not None
        self.decimal_frame.setVisible(show)
        if not show:
            return
        from ..cli_common import two_readings

        example = r.undecided[0][1] if r.undecided else self._decimal_example
        self._decimal_example = example
        as_point, as_comma = two_readings(example)
        self.decimal_question.setText(M.PASTE_DECIMAL.format(text=example))
        self.decimal_point.setText(f"Decimal point: {example} = {as_point}")
        self.decimal_comma.setText(f"Decimal comma: {example} = {as_comma}")

    def _decimal_chosen(self, mark: str) -> None:
        if self.decimal != mark:
            self.decimal = mark
            self.read_now()

    def rows(self):
        return self.reading.rows if self.reading is not None else ()

    def chosen_measure(self) -> str | None:
        """The measure chosen in the dialog when it differs from the review's."""
        m = self.measure_box.currentData()
        return None if m == self.measure else m

    def account(self):
        """What the paste adds to the review's intake account."""
        from dataclasses import replace

        r = self.reading
        if r is None:
            return None
        m = self.measure_box.currentData()
        how = (
            "chosen in the paste preview"
            if self._measure_touched
            else (
                f"suggested by the paste preview ({r.measure_why})" if r.measure_guess == m else ""
            )
        )
        if self._origin is not None:
            name, rows, unread = self._origin
            account = rows.intake_account(name, how, paste=r, unread_pages=unread)
        else:
            account = r.intake_account("pasted text", how)
        if self.decimal is not None and account.decimal_how == "option":
            account = replace(account, decimal_how="asked")
        return account

    def set_origin(self, origin) -> None:
        """The text came from a PDF: ``origin`` is :meth:`PdfDialog.origin`. The account
        then says "page 7 of review.pdf" and names each row's page and line (lines the
        user edits here are named as edited)."""
        self._origin = origin

    def chosen_published(self):
        r = self.reading
        if r is None or r.published is None or not self.take_published.isChecked():
            return None
        return r.published
