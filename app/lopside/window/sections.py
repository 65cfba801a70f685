"""Panels that show the renderer-neutral summary sections (lopside.summary) as HTML.

The words and numbers come from :mod:`lopside.summary`, which reads the analysis result;
this module only lays them out, so the window, the CLI text and the sheet agree.
"""

from __future__ import annotations

import html
from collections.abc import Callable, Sequence

from PySide6.QtGui import QTextOption
from PySide6.QtWidgets import QLabel, QTextBrowser, QVBoxLayout, QWidget

from . import messages as M

_CSS = """
body { font-family: 'DejaVu Sans', sans-serif; font-size: 9.5pt; color: #1F2933; }
h3 { font-size: 10.5pt; margin: 10px 0 4px 0; color: #1F2933; }
table { border-collapse: collapse; margin: 0 0 2px 0; }
th { text-align: left; background: #E4E7EB; padding: 3px 6px; font-weight: 600; }
td { padding: 2px 6px; vertical-align: top; border-bottom: 1px solid #E4E7EB; }
tr.em td { background: #E3F2EF; font-weight: 600; }
p.note { color: #616E7C; margin: 2px 0 2px 0; }
p.na { color: #7B2E1F; }
"""


class WrappingPage(QWidget):
    """The page inside a QScrollArea that grows with its word-wrapped labels.

    QScrollArea sizes its widget from the minimum size hint, which ignores the
    height-for-width of wrapped labels, so long readings were cut off. The page sets
    its own minimum height from its layout at the width it is given.
    """

    def resizeEvent(self, event) -> None:  # noqa: N802 - Qt API
        super().resizeEvent(event)
        lay = self.layout()
        if lay is not None and lay.hasHeightForWidth():
            h = lay.heightForWidth(self.width())
            if h > 0 and h != self.minimumHeight():
                self.setMinimumHeight(h)


def _cell(text: str) -> str:
    return html.escape(text).replace("\n", "<br>")


def section_html(section) -> str:
    """One summary Section as an HTML block (title, table, notes)."""
    out = [f"<h3>{html.escape(section.title)}</h3>"]
    if section.rows:
        # 99 %: at 100 % Qt's table layout can overflow its view by a pixel and show a
        # horizontal scroll bar for nothing
        out.append("<table width='99%'>")
        if section.header:
            out.append(
                "<tr>" + "".join(f"<th nowrap>{_cell(h)}</th>" for h in section.header) + "</tr>"
            )
        for i, row in enumerate(section.rows):
            cls = " class='em'" if i in section.emphasis else ""
            cells = list(row)
            if not section.header and len(cells) == 2:
                cells[0] = f"<b>{_cell(cells[0])}</b>"
                out.append(
                    f"<tr{cls}><td width='32%'>{cells[0]}</td><td>{_cell(cells[1])}</td></tr>"
                )
                continue
            out.append(f"<tr{cls}>" + "".join(f"<td>{_cell(c)}</td>" for c in cells) + "</tr>")
        out.append("</table>")
    for note in section.notes:
        if note:
            out.append(f"<p class='note'>{_cell(note)}</p>")
    return "".join(out)


class SectionsPanel(QWidget):
    """A scrolling HTML view of some summary sections of the current result.

    ``build(result) -> sequence of Section`` chooses the sections (a summary function
    call). When the summary part is missing, a labelled "not available" panel shows.
    """

    def __init__(
        self,
        name: str,
        build: Callable[[object], Sequence[object]],
        parent=None,
        *,
        intro: str = "",
    ) -> None:
        super().__init__(parent)
        self.setObjectName(name)
        self._build = build
        lay = QVBoxLayout(self)
        lay.setContentsMargins(4, 4, 4, 4)
        if intro:
            lab = QLabel(intro)
            lab.setWordWrap(True)
            lay.addWidget(lab)
        self.browser = QTextBrowser()
        self.browser.setOpenExternalLinks(False)
        self.browser.setAccessibleName(name)
        self.browser.document().setDefaultStyleSheet(_CSS)
        # break between words only: breaking inside them ("Studie / s") also left tables
        # a pixel wider than the panel, so it scrolled sideways
        self.browser.setWordWrapMode(QTextOption.WordWrap)
        lay.addWidget(self.browser)
        self._shown_for = None
        self.html = ""

    def show_result(self, result, *, force: bool = False) -> None:
        if result is None:
            self._set(f"<p>{html.escape(M.NO_ANALYSIS)}</p>")
            self._shown_for = None
            return
        if result is self._shown_for and not force:
            return
        try:
            sections = self._build(result)
        except ModuleNotFoundError as exc:
            self._set(f"<p class='na'>{html.escape(M.NOT_AVAILABLE.format(part=exc.name))}</p>")
            return
        self._shown_for = result
        self._set("".join(section_html(s) for s in sections if s is not None))

    def show_message(self, text: str) -> None:
        self._shown_for = None
        self._set(f"<p class='na'>{html.escape(text)}</p>")

    def reset(self) -> None:
        """The review changed completely: empty, and back to the top."""
        self._shown_for = None
        self._set(f"<p>{html.escape(M.ANALYSING)}</p>")
        self.browser.verticalScrollBar().setValue(0)
        self.browser.horizontalScrollBar().setValue(0)

    def _set(self, body: str) -> None:
        if body == self.html:
            return
        bar = self.browser.verticalScrollBar()
        pos = bar.value()
        self.html = body
        self.browser.setHtml(f"<html><body>{body}</body></html>")
        bar.setValue(pos)  # keep the reader's place across live updates

    def plain_text(self) -> str:
        return self.browser.toPlainText()
