"""The review details form: what the review is about and how its effects are expressed."""

from __future__ import annotations

from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import (
    QComboBox,
    QDoubleSpinBox,
    QFormLayout,
    QGroupBox,
    QHBoxLayout,
    QLabel,
    QLineEdit,
    QPlainTextEdit,
    QScrollArea,
    QVBoxLayout,
)

from .. import edits as ed
from ..model.review import CLAIM_CONCLUSIONS, MEASURE_NAMES, MEASURES
from ..session import Session
from . import messages as M
from .sections import WrappingPage

FAVOURS_TEXT = {
    "lower": "Lower values favour the intervention (e.g. fewer deaths)",
    "higher": "Higher values favour the intervention (e.g. more responders)",
}
_BAD_STYLE = "QLineEdit { background: #F7C9C3; }"


def measure_combo(parent=None) -> QComboBox:
    """A pick list of the measures, showing their names, with the code as item data."""
    box = QComboBox(parent)
    for m in MEASURES:
        box.addItem(f"{m} \u2013 {MEASURE_NAMES[m]}", m)
    box.setAccessibleName("Effect measure")
    return box


class LongTextEdit(QPlainTextEdit):
    """A few wrapped lines for a long single-paragraph text (the review question).

    It offers the small part of QLineEdit's API the form uses (``text``, ``setText``,
    ``editingFinished``); Tab moves on, Enter finishes, and line breaks become spaces.
    """

    editingFinished = Signal()  # noqa: N815 - the Qt name the form expects

    def __init__(self, lines: int = 3, parent=None) -> None:
        super().__init__(parent)
        self.setTabChangesFocus(True)
        self.setLineWrapMode(QPlainTextEdit.WidgetWidth)
        fm = self.fontMetrics()
        self.setFixedHeight(int(fm.lineSpacing() * lines + 12))

    def text(self) -> str:
        return " ".join(self.toPlainText().split())

    def setText(self, text: str) -> None:  # noqa: N802 - QLineEdit's name
        self.setPlainText(text)
        self.document().setModified(False)

    def setCursorPosition(self, pos: int) -> None:  # noqa: N802 - QLineEdit's name
        c = self.textCursor()
        c.setPosition(pos)
        self.setTextCursor(c)

    def keyPressEvent(self, event) -> None:  # noqa: N802 - Qt API
        if event.key() in (Qt.Key_Return, Qt.Key_Enter):
            self.editingFinished.emit()
            return
        super().keyPressEvent(event)

    def focusOutEvent(self, event) -> None:  # noqa: N802 - Qt API
        super().focusOutEvent(event)
        self.editingFinished.emit()


class DetailsForm(QScrollArea):
    """Edits review details through ``push`` (SetDetail edits); refreshes from the session."""

    status = Signal(str)

    def __init__(self, session: Session, push, parent=None) -> None:
        super().__init__(parent)
        self.session = session
        self.push = push
        self.setWidgetResizable(True)
        self.setFrameShape(QScrollArea.NoFrame)
        inner = WrappingPage()
        self.setWidget(inner)
        outer = QVBoxLayout(inner)
        outer.addWidget(self._review_box())
        outer.addWidget(self._scale_box())
        outer.addWidget(self._published_box())
        outer.addWidget(self._claim_box())
        self.source_note = QLabel()
        self.source_note.setWordWrap(True)
        self.source_note.setStyleSheet("color: #616E7C;")
        outer.addWidget(self.source_note)
        outer.addStretch(1)
        self._connect()
        self.refresh()

    def _review_box(self) -> QGroupBox:
        """Title, question, outcome, appraiser."""
        about = QGroupBox("The review")
        form = QFormLayout(about)
        form.setFieldGrowthPolicy(QFormLayout.AllNonFixedFieldsGrow)
        self.title = self._line("Title", "e.g. Vantoprine for delirium after surgery (invented)")
        self.question = LongTextEdit(3)
        self.question.setPlaceholderText("Population, intervention, comparison")
        self.question.setAccessibleName("Question")
        self.outcome = self._line("Outcome", "e.g. delirium within 7 days")
        self.appraiser = self._line("Appraiser", "Your name (printed on the sheet)")
        form.addRow("&Title:", self.title)
        form.addRow("&Question:", self.question)
        form.addRow("Outcome:", self.outcome)
        form.addRow("A&ppraiser:", self.appraiser)
        return about

    def _scale_box(self) -> QGroupBox:
        """Measure, units, the studies' CI level, direction of benefit, arm labels."""
        scale = QGroupBox("How the effects are expressed")
        f2 = QFormLayout(scale)
        f2.setFieldGrowthPolicy(QFormLayout.AllNonFixedFieldsGrow)
        self.measure = measure_combo()
        self.ci_level = QDoubleSpinBox()
        self.ci_level.setRange(50.1, 99.9)
        self.ci_level.setDecimals(1)
        self.ci_level.setSuffix(" %")
        self.ci_level.setAccessibleName("Confidence level of the study intervals")
        self.favours = QComboBox()
        for key, text in FAVOURS_TEXT.items():
            self.favours.addItem(text, key)
        self.favours.setAccessibleName("Direction that favours the intervention")
        self.int_label = self._line("Intervention arm label", "intervention")
        self.ctl_label = self._line("Comparator arm label", "control")
        f2.addRow("&Measure:", self.measure)
        self.units = self._line("Units of the outcome", "optional, e.g. mmHg (mean differences)")
        self.units.setToolTip(
            "The outcome's units, printed on the axes and the sheet for mean differences"
        )
        f2.addRow("U&nits:", self.units)
        f2.addRow("CI &level of the studies:", self.ci_level)
        f2.addRow("Favo&urs:", self.favours)
        arms = QHBoxLayout()
        arms.addWidget(self.int_label)
        arms.addWidget(QLabel("vs"))
        arms.addWidget(self.ctl_label)
        arms_label = QLabel("&Arm labels:")
        arms_label.setBuddy(self.int_label)
        f2.addRow(arms_label, arms)
        return scale

    def _published_box(self) -> QGroupBox:
        """The review's pooled result as printed (checked against the rows)."""
        pub = QGroupBox("Published pooled result (as printed)")
        f3 = QFormLayout(pub)
        self.pub_estimate = self._line("Published pooled estimate", "e.g. 0.72")
        self.pub_lower = self._line("Published CI lower limit", "lower")
        self.pub_upper = self._line("Published CI upper limit", "upper")
        self.pub_model = self._line("Model as printed", "e.g. random effects, M-H")
        row = QHBoxLayout()
        row.addWidget(self.pub_estimate)
        row.addWidget(QLabel("("))
        row.addWidget(self.pub_lower)
        row.addWidget(QLabel("to"))
        row.addWidget(self.pub_upper)
        row.addWidget(QLabel(")"))
        est_label = QLabel("Estimate (&CI):")
        est_label.setBuddy(self.pub_estimate)
        f3.addRow(est_label, row)
        f3.addRow("Model as pr&inted:", self.pub_model)
        self.pub_problem = QLabel()
        self.pub_problem.setWordWrap(True)
        self.pub_problem.setStyleSheet("color: #9B2C1F;")
        f3.addRow(self.pub_problem)
        return pub

    def _claim_box(self) -> QGroupBox:
        """What the review said about small-study effects (optional)."""
        said = QGroupBox("What the review said about small-study effects (optional)")
        f4 = QFormLayout(said)
        self.claim_test = self._line("Test the review used", "e.g. Egger's test")
        self.claim_statistic = self._line("Its statistic", "as printed, e.g. 1.21")
        self.claim_p = self._line("Its P value", "e.g. 0.23")
        self.claim_k = self._line("Studies it used", "e.g. 12")
        self.claim_conclusion = QComboBox()
        self.claim_conclusion.setAccessibleName("The review's conclusion")
        for value in CLAIM_CONCLUSIONS:
            self.claim_conclusion.addItem(value or "(not entered)", value)
        f4.addRow("Test used:", self.claim_test)
        stat_row = QHBoxLayout()
        stat_row.addWidget(self.claim_statistic)
        p_label = QLabel("P:")
        p_label.setBuddy(self.claim_p)
        stat_row.addWidget(p_label)
        stat_row.addWidget(self.claim_p)
        k_label = QLabel("studies:")
        k_label.setBuddy(self.claim_k)
        stat_row.addWidget(k_label)
        stat_row.addWidget(self.claim_k)
        stat_label = QLabel("Statistic:")
        stat_label.setBuddy(self.claim_statistic)
        f4.addRow(stat_label, stat_row)
        f4.addRow("Conclusion:", self.claim_conclusion)
        self.claim_problem = QLabel()
        self.claim_problem.setWordWrap(True)
        self.claim_problem.setStyleSheet("color: #9B2C1F;")
        f4.addRow(self.claim_problem)
        return said

    def _connect(self) -> None:
        """Each field commits its edit when editing finishes."""
        self._texts = {
            "title": self.title,
            "question": self.question,
            "outcome": self.outcome,
            "appraiser": self.appraiser,
            "units": self.units,
            "int_label": self.int_label,
            "ctl_label": self.ctl_label,
            "published.model": self.pub_model,
            "claim.test": self.claim_test,
        }
        self._numbers = {
            "published.estimate": self.pub_estimate,
            "published.lower": self.pub_lower,
            "published.upper": self.pub_upper,
            "claim.statistic": self.claim_statistic,
            "claim.p": self.claim_p,
            "claim.k": self.claim_k,
        }
        #: the model value each number box last showed (see refresh)
        self._shown: dict[str, float | None] = {}
        for field, w in self._texts.items():
            w.editingFinished.connect(lambda f=field, w=w: self._text_done(f, w))
        for field, w in self._numbers.items():
            w.editingFinished.connect(lambda f=field, w=w: self._number_done(f, w))
        self.measure.activated.connect(self._measure_done)
        self.favours.activated.connect(
            lambda _i: self._push(ed.SetFavours(self.favours.currentData(), "window"))
        )
        self.ci_level.editingFinished.connect(self._level_done)
        self.claim_conclusion.activated.connect(self._conclusion_done)

    def _line(self, name: str, placeholder: str) -> QLineEdit:
        w = QLineEdit()
        w.setPlaceholderText(placeholder)
        w.setAccessibleName(name)
        return w

    def _push(self, edit: ed.Edit) -> None:
        self.push(edit)

    # ------------------------------------------------------------------ commits

    def _current(self, field: str):
        d = self.session.review.details
        if field.startswith("published."):
            return getattr(d.published, field.split(".", 1)[1])
        if field.startswith("claim."):
            return getattr(d.claim, field.split(".", 1)[1])
        return getattr(d, field)

    def _text_done(self, field: str, w: QLineEdit) -> None:
        text = w.text().strip()
        if text != (self._current(field) or ""):
            self._push(ed.SetDetail(field, text))

    def _number_done(self, field: str, w: QLineEdit) -> None:
        from ..intake.numbers import parse_number

        text = w.text().strip()
        problem = self.claim_problem if field.startswith("claim.") else self.pub_problem
        if not text:
            value = None
        else:
            reading = parse_number(text)
            if not reading.ok:
                # the text stays in the box (nothing typed is discarded) and is not used
                w.setStyleSheet(_BAD_STYLE)
                unread = M.CLAIM_UNREAD if field.startswith("claim.") else M.DETAIL_UNREAD
                msg = unread.format(text=text)
                w.setToolTip(msg)
                problem.setText(msg)
                self.status.emit(msg)
                return
            value = reading.value
            bad = ""
            if field == "claim.p" and not 0.0 <= value <= 1.0:
                bad = M.CLAIM_P_BAD.format(text=text)
            elif field == "claim.k" and (value != int(value) or value < 0):
                bad = M.CLAIM_K_BAD.format(text=text)
            if bad:
                # kept in the box, said, not applied
                w.setStyleSheet(_BAD_STYLE)
                w.setToolTip(bad)
                problem.setText(bad)
                self.status.emit(bad)
                return
        w.setStyleSheet("")
        w.setToolTip("")
        problem.setText("")
        if value != self._current(field):
            self._shown[field] = value
            self._push(ed.SetDetail(field, value))

    def _conclusion_done(self, _index: int) -> None:
        value = self.claim_conclusion.currentData()
        if value != self.session.review.details.claim.conclusion:
            self._push(ed.SetDetail("claim.conclusion", value))

    def _measure_done(self, _index: int) -> None:
        m = self.measure.currentData()
        if m != self.session.review.details.measure:
            self._push(ed.SetDetail("measure", m))

    def _level_done(self) -> None:
        v = round(self.ci_level.value(), 1)
        if v != self.session.review.details.ci_level:
            self._push(ed.SetDetail("ci_level", v))

    # ------------------------------------------------------------------ refresh

    def refresh(self) -> None:
        """Show the session's details (without making edits)."""
        from ..edits import format_number

        d = self.session.review.details
        for field, w in self._texts.items():
            value = self._current(field) or ""
            if w.text() != value and not w.hasFocus():
                w.setText(value)
                w.setCursorPosition(0)  # long questions show their start, not their end
        for field, w in self._numbers.items():
            value = self._current(field)
            # a box holding unreadable text keeps it unless the value itself changed
            # (by undo, open or paste) since the box last showed it
            if field in self._shown and self._shown[field] == value and w.styleSheet():
                continue
            self._shown[field] = value
            w.setText(format_number(value))
            w.setStyleSheet("")
            w.setToolTip("")
        self.pub_problem.setText("")
        self.claim_problem.setText("")
        for box, value in (
            (self.measure, d.measure),
            (self.favours, d.favours),
            (self.claim_conclusion, d.claim.conclusion),
        ):
            i = box.findData(value)
            if i >= 0 and box.currentIndex() != i:
                box.blockSignals(True)
                box.setCurrentIndex(i)
                box.blockSignals(False)
        if abs(self.ci_level.value() - d.ci_level) > 1e-9:
            self.ci_level.blockSignals(True)
            self.ci_level.setValue(d.ci_level)
            self.ci_level.blockSignals(False)
        self.source_note.setText(d.source_note)
        self.source_note.setVisible(bool(d.source_note))

    def focus_first(self) -> None:
        self.title.setFocus(Qt.TabFocusReason)
