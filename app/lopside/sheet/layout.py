"""Paragraph and table styles of the sheet, and the renderer for summary Sections.

Colours come from :mod:`lopside.figures.style`, the one place the look is defined.
"""

from __future__ import annotations

import re
from xml.sax.saxutils import escape

from ..figures import style as fstyle
from . import fonts

#: Body font size (points) and leading; tables are a little smaller.
BODY = 8.0
SMALL = 7.0
TABLE = 7.2
#: Page geometry, in points (A4).
PAGE_W, PAGE_H = 595.2755905511812, 841.8897637795277
MARGIN_X = 36.0
MARGIN_TOP = 34.0
MARGIN_BOTTOM = 40.0
FRAME_W = PAGE_W - 2 * MARGIN_X
FRAME_H = PAGE_H - MARGIN_TOP - MARGIN_BOTTOM

HEAD_FILL = fstyle.BAND_RAMP[0]
EMPH_FILL = fstyle.BAND_RAMP[1]
BOX_EDGE = fstyle.BAND_EDGE


def styles() -> dict:
    """The paragraph styles, built once fonts are registered."""
    from reportlab.lib import colors
    from reportlab.lib.styles import ParagraphStyle

    fonts.register_fonts()
    ink = colors.HexColor(fstyle.INK)
    muted = colors.HexColor(fstyle.MUTED)
    base = ParagraphStyle(
        "body", fontName=fonts.REGULAR, fontSize=BODY, leading=BODY * 1.25, textColor=ink
    )
    return {
        "body": base,
        "small": ParagraphStyle("small", parent=base, fontSize=SMALL, leading=SMALL * 1.25),
        "muted": ParagraphStyle(
            "muted", parent=base, fontSize=SMALL, leading=SMALL * 1.25, textColor=muted
        ),
        "cell": ParagraphStyle("cell", parent=base, fontSize=TABLE, leading=TABLE * 1.22),
        "cell_bold": ParagraphStyle(
            "cell_bold", parent=base, fontName=fonts.BOLD, fontSize=TABLE, leading=TABLE * 1.22
        ),
        "cell_head": ParagraphStyle(
            "cell_head",
            parent=base,
            fontName=fonts.BOLD,
            fontSize=TABLE,
            leading=TABLE * 1.22,
            textColor=ink,
        ),
        "title": ParagraphStyle(
            "title", parent=base, fontName=fonts.BOLD, fontSize=15, leading=18, spaceAfter=2
        ),
        "subtitle": ParagraphStyle(
            "subtitle", parent=base, fontSize=9.5, leading=12, textColor=muted, spaceAfter=4
        ),
        "h2": ParagraphStyle(
            "h2",
            parent=base,
            fontName=fonts.BOLD,
            fontSize=10,
            leading=12.5,
            spaceBefore=7,
            spaceAfter=3,
            textColor=ink,
        ),
        "box": ParagraphStyle("box", parent=base, fontSize=BODY, leading=BODY * 1.3),
        "caution": ParagraphStyle(
            "caution", parent=base, fontName=fonts.BOLD, fontSize=7.6, leading=9.6
        ),
    }


_BOLD_PREFIX = re.compile(r"^(For|Against|Can't tell|Look for):")


def markup(text: str, *, bold_prefix: bool = False) -> str:
    """Escape text for a Paragraph; newlines become line breaks.

    With ``bold_prefix`` an evidence word at the start of a line ("For:", "Against:",
    "Can't tell:") is set in bold and "Look for:" lines in italics.
    """
    out = []
    for line in str(text).split("\n"):
        esc = escape(line)
        if bold_prefix:
            m = _BOLD_PREFIX.match(line)
            if m:
                word = escape(m.group(1))
                rest = escape(line[m.end() :])
                if m.group(1) == "Look for":
                    esc = f"<i><b>{word}:</b>{rest}</i>"
                else:
                    esc = f"<b>{word}:</b>{rest}"
        out.append(esc)
    return "<br/>".join(out)


_PARAGRAPH = None


def paragraph_class():
    """reportlab's Paragraph, remembering its line breaks per width.

    A table wraps every cell several times at the same width (to size its rows, to try a
    split, to draw), and Paragraph.wrap breaks the lines afresh each time; its result
    depends on the width alone (reportlab 4's wrap reads the height only to give up below
    a minimal width), so the first answer is kept. The sheet's bytes are unchanged.
    """
    global _PARAGRAPH
    if _PARAGRAPH is None:
        from reportlab.platypus import Paragraph
        from reportlab.platypus.paragraph import _FUZZ

        class SheetParagraph(Paragraph):
            def wrap(self, availWidth, availHeight):  # noqa: N803 - reportlab's names
                if availWidth < _FUZZ:
                    return Paragraph.wrap(self, availWidth, availHeight)
                memo = self.__dict__.setdefault("_lopside_wraps", {})
                hit = memo.get(availWidth)
                if hit is None:
                    size = Paragraph.wrap(self, availWidth, availHeight)
                    memo[availWidth] = (size, self.blPara, self._wrapWidths)
                    return size
                size, self.blPara, self._wrapWidths = hit
                self.width, self.height = size
                return size

        _PARAGRAPH = SheetParagraph
    return _PARAGRAPH


def para(text: str, style, **kw):
    return paragraph_class()(markup(text, **kw), style)


def section_table(section, st: dict, width: float = FRAME_W, *, label_width: float = 118.0):
    """A summary :class:`~lopside.summary.Section` as a reportlab Table (notes underneath).

    Returns a list of flowables.
    """
    from reportlab.lib import colors
    from reportlab.platypus import Table, TableStyle

    rule = colors.HexColor(fstyle.RULE)
    bold_prefix = section.key == "causes"
    flow = []
    if not section.rows:
        return [para("(nothing to show)", st["muted"])]
    if not section.header:
        data = [
            [para(r[0], st["cell_bold"]), para(r[1] if len(r) > 1 else "", st["cell"])]
            for r in section.rows
        ]
        t = Table(data, colWidths=[label_width, width - label_width], hAlign="LEFT")
        cmds = [
            ("VALIGN", (0, 0), (-1, -1), "TOP"),
            ("FONTNAME", (0, 0), (-1, -1), fonts.REGULAR),
            ("LEFTPADDING", (0, 0), (-1, -1), 3),
            ("RIGHTPADDING", (0, 0), (-1, -1), 3),
            ("TOPPADDING", (0, 0), (-1, -1), 1.6),
            ("BOTTOMPADDING", (0, 0), (-1, -1), 1.6),
            ("LINEBELOW", (0, 0), (-1, -1), 0.3, rule),
        ]
        for i in section.emphasis:
            cmds.append(("BACKGROUND", (0, i), (-1, i), colors.HexColor(EMPH_FILL)))
        t.setStyle(TableStyle(cmds))
        flow.append(t)
    else:
        ncol = len(section.header)
        rel = list(section.widths) if len(section.widths) == ncol else [1.0] * ncol
        tot = sum(rel)
        col_w = [width * r / tot for r in rel]
        data = [[para(h, st["cell_head"]) for h in section.header]]
        for i, r in enumerate(section.rows):
            style = st["cell_bold"] if i in section.emphasis and section.key != "causes" else None
            row = []
            for j, cell in enumerate(r):
                s = st["cell_bold"] if (j == 0 and bold_prefix) else (style or st["cell"])
                row.append(para(cell, s, bold_prefix=bold_prefix and j == 1))
            row += [para("", st["cell"])] * (ncol - len(row))
            data.append(row)
        t = Table(data, colWidths=col_w, hAlign="LEFT", repeatRows=1)
        cmds = [
            ("VALIGN", (0, 0), (-1, -1), "TOP"),
            ("FONTNAME", (0, 0), (-1, -1), fonts.REGULAR),
            ("LEFTPADDING", (0, 0), (-1, -1), 3),
            ("RIGHTPADDING", (0, 0), (-1, -1), 3),
            ("TOPPADDING", (0, 0), (-1, -1), 1.6),
            ("BOTTOMPADDING", (0, 0), (-1, -1), 1.8),
            ("BACKGROUND", (0, 0), (-1, 0), colors.HexColor(HEAD_FILL)),
            ("LINEBELOW", (0, 0), (-1, 0), 0.6, colors.HexColor(fstyle.INK)),
            ("LINEBELOW", (0, 1), (-1, -1), 0.3, rule),
        ]
        for i in section.emphasis:
            cmds.append(("BACKGROUND", (0, i + 1), (-1, i + 1), colors.HexColor(EMPH_FILL)))
        t.setStyle(TableStyle(cmds))
        flow.append(t)
    for note in section.notes:
        if note:
            flow.append(para(note, st["muted"]))
    return flow


def boxed(flowables, width: float = FRAME_W, *, fill: str | None = None, edge: str = BOX_EDGE):
    """Wrap flowables in a one-cell table with a border (for the key messages, the caution)."""
    from reportlab.lib import colors
    from reportlab.platypus import Table, TableStyle

    t = Table([[flowables]], colWidths=[width], hAlign="LEFT")
    cmds = [
        ("BOX", (0, 0), (-1, -1), 0.8, colors.HexColor(edge)),
        ("FONTNAME", (0, 0), (-1, -1), fonts.REGULAR),
        ("LEFTPADDING", (0, 0), (-1, -1), 6),
        ("RIGHTPADDING", (0, 0), (-1, -1), 6),
        ("TOPPADDING", (0, 0), (-1, -1), 4),
        ("BOTTOMPADDING", (0, 0), (-1, -1), 5),
    ]
    if fill:
        cmds.append(("BACKGROUND", (0, 0), (-1, -1), colors.HexColor(fill)))
    t.setStyle(TableStyle(cmds))
    return t
