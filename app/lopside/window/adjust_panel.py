"""The Adjust view: adjusted estimates, how strong selection would have to be (with the η
curve drawn by :mod:`lopside.figures.selection`), and the leave-one-out sensitivity.

The panel computes nothing: the words come from :mod:`lopside.summary`, the curve from the
analysis result. Typing a selection ratio η changes the analysis settings (one more row in
the table); the analysis runs again as after any other change.
"""

from __future__ import annotations

import html
import math

from PySide6.QtCore import QUrl
from PySide6.QtGui import QImage, QTextDocument
from PySide6.QtWidgets import QHBoxLayout, QLabel, QLineEdit

from . import messages as M
from .sections import SectionsPanel, section_html

CURVE_URL = "lopside-selection-curve.png"
#: pixels per inch of the curve image on screen
CURVE_DPI = 110


def adjust_sections(result):
    from .. import summary as S

    out = [S.adjustments_section(result)]
    tf = S.trim_fill_section(result)  # every trim-and-fill setting beside the default
    if tf is not None:
        out.append(tf)
    out += [S.selection_strength_section(result), S.sensitivity_section(result)]
    return out


class AdjustPanel(SectionsPanel):
    """Sections of the Adjust view, the η curve inside them, and a field for one more η."""

    def __init__(self, session, parent=None) -> None:
        super().__init__("Adjustments", adjust_sections, parent)
        self.session = session
        row = QHBoxLayout()
        lab = QLabel(M.ETA_LABEL)
        self.eta_edit = QLineEdit()
        self.eta_edit.setAccessibleName(M.ETA_LABEL)
        self.eta_edit.setToolTip(M.ETA_TIP)
        self.eta_edit.setPlaceholderText("e.g. 3")
        self.eta_edit.setMaximumWidth(90)
        lab.setBuddy(self.eta_edit)
        self.eta_feedback = QLabel("")
        self.eta_feedback.setWordWrap(True)
        row.addWidget(lab)
        row.addWidget(self.eta_edit)
        row.addWidget(self.eta_feedback, 1)
        self.layout().insertLayout(0, row)
        self.eta_edit.editingFinished.connect(self._eta_entered)
        self.curve_error = ""

    # ---------------------------------------------------------------- η

    def _eta_entered(self) -> None:
        text = self.eta_edit.text().strip().replace(",", ".")
        if not text:
            value = None
        else:
            try:
                value = float(text)
            except ValueError:
                value = math.nan
            if not (math.isfinite(value) and value >= 1):
                # kept in the field, never applied: say why
                self.eta_feedback.setText(M.ETA_BAD.format(text=self.eta_edit.text()))
                return
        self.eta_feedback.setText("")
        if value != self.session.settings.selection_eta:
            self.session.update_settings(selection_eta=value)

    # ---------------------------------------------------------------- result

    def _curve_png(self, result) -> bytes | None:
        from ..figures.common import FigureInputError
        from ..figures.export import figure_bytes
        from ..figures.selection import selection_curve_figure, selection_curve_input_from_result

        self.curve_error = ""
        inp = selection_curve_input_from_result(result)
        if inp is None:
            return None
        try:
            return figure_bytes(selection_curve_figure(inp, size="column"), "png", dpi=CURVE_DPI)
        except (FigureInputError, ValueError) as exc:
            self.curve_error = M.CURVE_FAILED.format(error=exc)
            return None

    def show_result(self, result, *, force: bool = False) -> None:
        if result is None or (result is self._shown_for and not force):
            super().show_result(result, force=force)
            return
        from .. import summary as S

        eta = result.settings.selection_eta
        if not self.eta_edit.hasFocus() and not self.eta_feedback.text():
            self.eta_edit.setText("" if eta is None else f"{eta:g}")
        png = self._curve_png(result)
        image = QImage.fromData(png, "PNG") if png is not None else None
        parts = []
        for sec in adjust_sections(result):
            if sec.key != "selection_strength":
                parts.append(section_html(sec))
                continue
            sentence = S.selection_sentence(result)
            missing = S.missing_trials_sentence(result)
            block = [f"<h3>{html.escape(sec.title)}</h3>"]
            for text in (sentence, missing):
                if text:
                    block.append(f"<p><b>{html.escape(text)}</b></p>")
            if png is not None:
                block.append(f"<p><img src='{CURVE_URL}'></p>")
            elif self.curve_error:
                block.append(f"<p class='na'>{html.escape(self.curve_error)}</p>")
            body = section_html(sec).split("</h3>", 1)[1]
            parts.append("".join(block) + body)
        self._shown_for = result
        self.html = ""  # the image may have changed even when the words did not
        if image is not None:
            self.browser.document().addResource(QTextDocument.ImageResource, QUrl(CURVE_URL), image)
        self._set("".join(parts))
        if image is not None:
            # setHtml clears the document's resources: add the image again and relayout
            doc = self.browser.document()
            doc.addResource(QTextDocument.ImageResource, QUrl(CURVE_URL), image)
            doc.markContentsDirty(0, doc.characterCount())
