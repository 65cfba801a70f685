"""The causes view: each alternative explanation with the evidence, a judgement and notes.

The evidence and the suggested rating are read from the one assessment of the result
(:func:`lopside.assessment.assessment_of`, the object the sheet and the JSON read); the
judgements, notes and override are the appraiser's, stored in the review as edits.
"""

from __future__ import annotations

import html

from PySide6.QtCore import Qt, QTimer
from PySide6.QtWidgets import (
    QComboBox,
    QFormLayout,
    QGroupBox,
    QLabel,
    QLineEdit,
    QPlainTextEdit,
    QScrollArea,
    QVBoxLayout,
)

from .. import edits as ed
from ..model.review import CAUSE_TITLES, CAUSES, DOMAIN_RATINGS, JUDGEMENTS, CauseNote
from ..session import Session
from ..words.numbers import UPDATING
from . import messages as M
from .sections import WrappingPage

_MARK = {"for": ("+", "#9B2C1F"), "against": ("\u2212", "#1F4E79"), "unclear": ("?", "#616E7C")}
NOTES_DELAY_MS = 400


def _notes_box(name: str) -> QPlainTextEdit:
    box = QPlainTextEdit()
    box.setAccessibleName(name)
    box.setTabChangesFocus(True)  # keyboard users leave the box with Tab
    box.setFixedHeight(54)
    return box


class CausesPanel(QScrollArea):
    """Reads the appraisal of the current result; writes the appraiser's notes as edits."""

    def __init__(self, session: Session, push, parent=None) -> None:
        super().__init__(parent)
        self.setObjectName("Causes")
        self.session = session
        self.push = push
        self.setWidgetResizable(True)
        inner = WrappingPage()
        self.setWidget(inner)
        lay = QVBoxLayout(inner)
        self.reading = QLabel(M.NO_ANALYSIS)
        self.reading.setWordWrap(True)
        self.reading.setTextFormat(Qt.RichText)
        shows = QGroupBox("What the funnel shows")
        QVBoxLayout(shows).addWidget(self.reading)
        lay.addWidget(shows)
        # the review's own claim about small-study effects beside Lopside's reading
        self.claim = QLabel("")
        self.claim.setWordWrap(True)
        self.claim.setTextFormat(Qt.RichText)
        self.claim_box = QGroupBox("What the review itself said")
        QVBoxLayout(self.claim_box).addWidget(self.claim)
        self.claim_box.setVisible(False)
        lay.addWidget(self.claim_box)
        intro = QLabel(
            "A lopsided funnel has several possible explanations besides selective "
            "publication. For each, the evidence from this review is listed (+ for, "
            "\u2212 against, ? cannot tell); record your own judgement and notes."
        )
        intro.setWordWrap(True)
        lay.addWidget(intro)

        self.evidence: dict[str, QLabel] = {}
        self.judgement: dict[str, QComboBox] = {}
        self.notes: dict[str, QPlainTextEdit] = {}
        self._timers: dict[str, QTimer] = {}
        for key in CAUSES:
            box = QGroupBox(CAUSE_TITLES[key])
            form = QFormLayout(box)
            ev = QLabel("\u2013")
            ev.setWordWrap(True)
            ev.setTextFormat(Qt.RichText)
            form.addRow(ev)
            j = QComboBox()
            for text in JUDGEMENTS:
                j.addItem(text, text)
            j.setAccessibleName(f"Judgement: {CAUSE_TITLES[key]}")
            n = _notes_box(f"Notes: {CAUSE_TITLES[key]}")
            form.addRow("Your judgement:", j)
            form.addRow("Notes:", n)
            lay.addWidget(box)
            self.evidence[key], self.judgement[key], self.notes[key] = ev, j, n
            t = QTimer(self)
            t.setSingleShot(True)
            t.setInterval(NOTES_DELAY_MS)
            t.timeout.connect(lambda k=key: self._commit(k))
            self._timers[key] = t
            j.activated.connect(lambda _i, k=key: self._commit(k))
            n.textChanged.connect(lambda k=key: self._timers[k].start())

        rating = QGroupBox("Publication bias: suggested rating")
        rf = QFormLayout(rating)
        self.suggested = QLabel("\u2013")
        self.suggested.setWordWrap(True)
        self.suggested.setTextFormat(Qt.RichText)
        rf.addRow(self.suggested)
        self.override = QComboBox()
        self.override.addItem("Accept the suggestion", "")
        for r in DOMAIN_RATINGS:
            self.override.addItem(r, r)
        self.override.setAccessibleName("Your rating of the publication-bias domain")
        self.reason = QLineEdit()
        self.reason.setPlaceholderText("Why you rate it differently (printed on the sheet)")
        self.reason.setAccessibleName("Reason for your rating")
        rf.addRow("Your rating:", self.override)
        rf.addRow("Reason:", self.reason)
        lay.addWidget(rating)
        self.override.activated.connect(lambda _i: self._commit_rating())
        self.reason.editingFinished.connect(self._commit_rating)

        general = QGroupBox("General notes")
        gl = QVBoxLayout(general)
        self.general = _notes_box("General notes")
        self.general.setFixedHeight(70)
        gl.addWidget(self.general)
        lay.addWidget(general)
        lay.addStretch(1)
        self._general_timer = QTimer(self)
        self._general_timer.setSingleShot(True)
        self._general_timer.setInterval(NOTES_DELAY_MS)
        self._general_timer.timeout.connect(self._commit_general)
        self.general.textChanged.connect(self._general_timer.start)
        self._appraisal_for = None
        self.appraisal = None
        self.refresh_notes()

    # ---------------------------------------------------------------- commits

    def flush(self) -> None:
        """Commit any notes still waiting for the typing pause (before save/close)."""
        for key, t in self._timers.items():
            if t.isActive():
                t.stop()
                self._commit(key)
        if self._general_timer.isActive():
            self._general_timer.stop()
            self._commit_general()

    def _commit(self, key: str) -> None:
        note = CauseNote(self.judgement[key].currentData(), self.notes[key].toPlainText())
        if note != self.session.review.notes.cause(key):
            self.push(ed.SetCauseNote(key, note))

    def _commit_rating(self) -> None:
        n = self.session.review.notes
        rating, reason = self.override.currentData(), self.reason.text()
        if (rating, reason) != (n.rating_override, n.rating_reason):
            self.push(ed.SetRatingOverride(rating, reason))

    def _commit_general(self) -> None:
        text = self.general.toPlainText()
        if text != self.session.review.notes.general:
            self.push(ed.SetGeneralNotes(text))

    # ---------------------------------------------------------------- refresh

    def refresh_notes(self) -> None:
        """Show the review's notes (after undo, open, recovery) without making edits."""
        notes = self.session.review.notes
        for key in CAUSES:
            c = notes.cause(key)
            j = self.judgement[key]
            i = j.findData(c.judgement)
            if i >= 0 and i != j.currentIndex():
                j.setCurrentIndex(i)
            box = self.notes[key]
            if box.toPlainText() != c.notes and not self._timers[key].isActive():
                box.blockSignals(True)
                box.setPlainText(c.notes)
                box.blockSignals(False)
        i = self.override.findData(notes.rating_override)
        if i >= 0 and i != self.override.currentIndex():
            self.override.setCurrentIndex(i)
        if self.reason.text() != notes.rating_reason and not self.reason.hasFocus():
            self.reason.setText(notes.rating_reason)
        if self.general.toPlainText() != notes.general and not self._general_timer.isActive():
            self.general.blockSignals(True)
            self.general.setPlainText(notes.general)
            self.general.blockSignals(False)

    def _show_claim(self, result) -> None:
        from ..summary import review_claim_section

        sec = review_claim_section(result)
        self.claim_box.setVisible(sec is not None)
        if sec is None:
            self.claim.setText("")
            return
        rows = "".join(
            f"<tr><td><b>{html.escape(label)}</b>&nbsp;</td><td>{html.escape(text)}</td></tr>"
            for label, text in sec.rows
        )
        self.claim.setText(f"<table>{rows}</table>")

    def show_message(self, text: str, blank: str = "\u2013") -> None:
        """``text`` in place of the reading; ``blank`` in each evidence and rating field."""
        self._appraisal_for = None
        self.appraisal = None
        self.reading.setText(html.escape(text))
        self.claim_box.setVisible(False)  # no result: no comparison with the review's claim
        for ev in self.evidence.values():
            ev.setText(html.escape(blank))
        self.suggested.setText(html.escape(blank))

    def reset(self) -> None:
        """The review changed completely: no readings of the old one, back to the top."""
        self.show_message(M.ANALYSING)
        self.verticalScrollBar().setValue(0)
        self.refresh_notes()

    def show_result(self, result) -> None:
        """Show the appraisal readings of ``result`` (re-read only when the data changed)."""
        if result is None:
            self.show_message(M.NO_ANALYSIS)
            return
        if getattr(result, "stage", "full") != "full":
            # a partial analysis would give a partial reading that the full one may contradict;
            # nothing of the reading before the edit stays up beside it either (the evidence
            # and the suggested rating were left showing the previous data)
            self.show_message(M.READING_UPDATING, UPDATING)
            return
        # the readings depend on the statistics, not on the notes: skip when only notes moved
        key = (result.data, result.settings, result.power, result.review.details)
        if self._appraisal_for is not None and all(
            a is b for a, b in zip(key, self._appraisal_for)
        ):
            return
        try:
            from ..assessment import assessment_of
        except ImportError as exc:
            msg = M.NOT_AVAILABLE.format(part=getattr(exc, "name", "lopside.appraise"))
            self.reading.setText(html.escape(msg))
            for ev in self.evidence.values():
                ev.setText("\u2013")
            self.suggested.setText(html.escape(msg))
            return
        # the one assessment of this result (the same object the sheet and the JSON read)
        a = assessment_of(result).appraisal
        self.appraisal = a
        self._appraisal_for = key
        lines = "".join(
            f"<tr><td><b>{html.escape(label)}</b>&nbsp;</td><td>{html.escape(text)}</td></tr>"
            for label, text in a.small_study.lines
        )
        self.reading.setText(f"<table>{lines}</table>")
        self._show_claim(result)
        by_key = {c.key: c for c in a.causes}
        for key in CAUSES:
            c = by_key.get(key)
            if c is None:
                self.evidence[key].setText("\u2013")
                continue
            items = []
            for e in c.evidence:
                mark, colour = _MARK.get(e.direction, _MARK["unclear"])
                items.append(
                    f"<span style='color:{colour}'><b>{mark}</b></span> {html.escape(e.text)}"
                )
            body = "<br>".join(items) or "No evidence either way from these data."
            if c.what_to_check:
                body += f"<br><i>Look for: {html.escape(c.what_to_check)}</i>"
            self.evidence[key].setText(body)
        r = a.rating
        # reasons indented by two spaces are the signals listed under the line before them
        items = []
        for x in r.reasons:
            if x.startswith("  ") and items:
                items[-1][1].append(x.strip())
            else:
                items.append((x, []))
        reasons = "".join(
            f"<li>{html.escape(x)}"
            + ("<ul>" + "".join(f"<li>{html.escape(s)}</li>" for s in sub) + "</ul>" if sub else "")
            + "</li>"
            for x, sub in items
        )
        self.suggested.setText(
            f"<b>Suggested: {html.escape(r.suggested)}</b><ul style='margin:0'>{reasons}</ul>"
            f"<span style='color:#616E7C'>{html.escape(r.note)}</span>"
        )
