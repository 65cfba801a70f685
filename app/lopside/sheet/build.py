"""Assemble the appraisal sheet: three A4 pages, then the forest plot if asked for.

Design invariants
-----------------
* Every word and number comes from :mod:`lopside.summary` (the same rows as the CLI text
  and the window), reading one :class:`lopside.assessment.Assessment` (the analysis and
  its appraisal, computed once); this module only lays them out and never appraises.
* The main sheet is always exactly three pages: page 1 the review, the key messages, the
  data and the pooled results; page 2 the funnel plot, tests, adjustments (with trim and
  fill under every setting) and leave-one-out; page 3 the explanations side by
  side, the suggested rating and the settings. Each page is a frame that shrinks its
  content only if it would overflow, so long labels or many problem rows never push the
  layout onto a fourth page. Lists are capped in :mod:`lopside.summary` so that shrinking
  stays rare and slight.
* The forest plot, when included, follows on its own page(s), as many as its rows need.
* Every page carries the caution and a reproducibility footer (software version, date,
  key settings, the data's SHA-256 fingerprint, "page i of n").
* Reproducible output: fixed PDF metadata, no creation date or random document id unless
  ``timestamp=True``.
"""

from __future__ import annotations

import datetime as _dt
import io
from dataclasses import dataclass, replace

from .. import CAUTION, __version__
from ..summary import (
    adjustments_section,
    applicability_section,
    causes_section,
    data_section,
    glance_section,
    header_section,
    heterogeneity_section,
    pooled_section,
    rating_section,
    reconciliation_section,
    review_claim_section,
    selection_strength_brief,
    sensitivity_section,
    settings_section,
    small_study_section,
    subgroups_section,
    tests_section,
    trim_fill_section,
)
from ..words.numbers import fmt_num
from ..words.sentences import trim_fill_range
from . import fonts, layout
from .layout import FRAME_H, FRAME_W, boxed, para, section_table

TITLE = "Small-study effects: appraisal sheet"
MAIN_PAGES = 3
NOT_JUDGED = "not judged"
CHECK_BOXES = "☐ unlikely\n☐ possible\n☐ likely"


@dataclass(frozen=True, slots=True)
class SheetBuild:
    """A built sheet and what the layout had to do.

    Attributes
    ----------
    pdf : bytes
    pages : int
        Total pages (3 + forest pages).
    shrink : tuple of float
        Scale applied to each main page's content (1.0 = fitted without shrinking).
    forest_pages : int
    """

    pdf: bytes
    pages: int
    shrink: tuple[float, ...]
    forest_pages: int


def _footer_text(result, date: str) -> str:
    s = result.settings
    hk = ", Hartung-Knapp" if s.hksj else ""
    fp = result.fingerprint or ""
    short = f"{fp[:12]}…" if fp else "–"
    return (
        f"Lopside {__version__} · {date} · random effects τ² {s.tau2_method}{hk} · tests at "
        f"p < {fmt_num(s.test_alpha, 2)} · trim and fill {s.trimfill_estimator} · data "
        f"SHA-256 {short} (full in the settings, page 3)"
    )


def _canvas_class(footer: str, caution: str):
    """A canvas that knows the page count before drawing footers ("page 1 of 3")."""
    from reportlab.lib import colors
    from reportlab.pdfgen import canvas
    from reportlab.platypus import Paragraph

    from ..figures import style as fstyle

    st = layout.styles()
    muted = colors.HexColor(fstyle.MUTED)
    rule = colors.HexColor(fstyle.RULE)

    class FooterCanvas(canvas.Canvas):
        def __init__(self, *args, **kwargs):
            # no stray Helvetica resource: the page's initial font is the embedded one
            kwargs["initialFontName"] = kwargs.get("initialFontName") or fonts.REGULAR
            kwargs["lang"] = kwargs.get("lang") or "en"
            super().__init__(*args, **kwargs)
            self._pages: list[dict] = []

        def showPage(self):  # noqa: N802 - reportlab's name
            self._pages.append(dict(self.__dict__))
            self._startPage()

        def save(self):
            n = len(self._pages)
            for state in self._pages:
                self.__dict__.update(state)
                self._footer(n)
                super().showPage()
            super().save()

        def _footer(self, n: int) -> None:
            x0 = layout.MARGIN_X
            width = FRAME_W
            y_rule = layout.MARGIN_BOTTOM - 4
            self.setStrokeColor(rule)
            self.setLineWidth(0.4)
            self.line(x0, y_rule, x0 + width, y_rule)
            p = Paragraph(
                layout.markup(caution), st["muted"].clone("foot", fontSize=6.2, leading=7.4)
            )
            _w, h = p.wrap(width, 40)
            p.drawOn(self, x0, y_rule - 2 - h)
            self.setFillColor(muted)
            self.setFont(fonts.REGULAR, 6.2)
            y = y_rule - 2 - h - 8
            page = f"page {self._pageNumber} of {n}"
            self.drawRightString(x0 + width, y, page)
            room = width - self.stringWidth(page, fonts.REGULAR, 6.2) - 12
            text = footer
            while self.stringWidth(text, fonts.REGULAR, 6.2) > room and len(text) > 10:
                text = text[:-2].rstrip() + "…"
            self.drawString(x0, y, text)

    return FooterCanvas


def _h2(text: str, st):
    return para(text, st["h2"])


def _section(sec, st, title: str | None = None, **kw) -> list:
    out = [_h2(title or sec.title, st)]
    out.extend(section_table(sec, st, **kw))
    return out


def _glance(assessment, st) -> list:
    """The key messages box on page 1: the rows of :func:`lopside.summary.glance_section`."""
    Paragraph = layout.paragraph_class()  # noqa: N806 - reportlab's class, kept by width

    sec = glance_section(assessment)
    items = [
        Paragraph(f"<b>{layout.markup(label)}:</b> {layout.markup(text)}", st["box"])
        for label, text in sec.rows
    ]
    items.append(Paragraph(f"<b>Caution.</b> {layout.markup(CAUTION)}", st["small"]))
    return [boxed(items, fill=layout.HEAD_FILL)]


def _header(result, st, date: str) -> list:
    from reportlab.lib import colors
    from reportlab.platypus import Table, TableStyle

    from ..figures import style as fstyle

    sec = header_section(result, date=date)
    rows = dict(sec.rows)
    if not result.review.details.appraiser:
        rows["Appraiser"] = "_" * 28  # a line to write on: the sheet is printed
    out = [para(TITLE, st["title"]), para(rows.get("Review", ""), st["subtitle"])]
    left = [k for k in ("Question", "Outcome", "Effect measure") if k in rows]
    right = [k for k in ("Favours intervention", "Appraiser", "Date") if k in rows]
    data = []
    for i in range(max(len(left), len(right))):
        row = []
        for keys in (left, right):
            if i < len(keys):
                row += [para(keys[i], st["cell_bold"]), para(rows[keys[i]], st["cell"])]
            else:
                row += ["", ""]
        data.append(row)
    w = FRAME_W
    t = Table(data, colWidths=[62, w * 0.60 - 62, 96, w * 0.40 - 96], hAlign="LEFT")
    t.setStyle(
        TableStyle(
            [
                ("VALIGN", (0, 0), (-1, -1), "TOP"),
                ("FONTNAME", (0, 0), (-1, -1), fonts.REGULAR),
                ("LEFTPADDING", (0, 0), (-1, -1), 2),
                ("RIGHTPADDING", (0, 0), (-1, -1), 3),
                ("TOPPADDING", (0, 0), (-1, -1), 1),
                ("BOTTOMPADDING", (0, 0), (-1, -1), 1),
                ("LINEBELOW", (0, -1), (-1, -1), 0.6, colors.HexColor(fstyle.INK)),
            ]
        )
    )
    out.append(t)
    for note in sec.notes:
        out.append(para(note, st["muted"]))
    return out


def _page1(assessment, st, date: str) -> list:
    result = assessment.analysis
    out = _header(result, st, date)
    out += [_spacer(5)] + _glance(assessment, st)
    out += _section(data_section(result), st)
    from ..summary import row_flags_section  # rows that stand out (stats.diagnostics)

    out += _section(row_flags_section(result), st)
    out += _section(reconciliation_section(result), st)
    out += _section(pooled_section(result), st)
    out += _section(heterogeneity_section(result), st)
    sg = subgroups_section(result)
    if sg is not None:
        out += _section(sg, st)
    return out


def _spacer(h: float):
    from reportlab.platypus import Spacer

    return Spacer(1, h)


def _funnel_block(result, appraisal, st) -> list:
    from reportlab.platypus import Table, TableStyle

    from .figures import FigureUnavailable, funnel_flowable

    # with the η curve under it the funnel column is narrower, so that the reading beside
    # it wraps less and the block is no taller than the funnel alone was
    fig_w = 206.0 if _has_selection_curve(result) else 243.0
    # the η curve (how strong selection would have to be) goes under the funnel, in the
    # room the reading beside it leaves; the funnel is drawn a little shorter for it
    curve = _selection_curve(result, fig_w, st)
    try:
        fig = funnel_flowable(result, fig_w, 300.0 if curve is None else 178.0)
    except FigureUnavailable as exc:
        fig = para(f"The funnel plot could not be drawn: {exc}", st["muted"])
    left = [fig] if curve is None else [fig, _spacer(4), curve]
    sec = small_study_section(appraisal)
    text_w = FRAME_W - fig_w - 8
    reading = section_table(sec, st, width=text_w, label_width=58)
    t = Table([[left, reading]], colWidths=[fig_w + 8, text_w], hAlign="LEFT")
    t.setStyle(
        TableStyle(
            [
                ("VALIGN", (0, 0), (-1, -1), "TOP"),
                ("FONTNAME", (0, 0), (-1, -1), fonts.REGULAR),
                ("LEFTPADDING", (0, 0), (-1, -1), 0),
                ("RIGHTPADDING", (0, 0), (-1, -1), 0),
                ("TOPPADDING", (0, 0), (-1, -1), 0),
            ]
        )
    )
    return [_h2("The funnel plot and what it shows", st), t]


def _has_selection_curve(result) -> bool:
    ss = getattr(result, "selection_sensitivity", None)
    return hasattr(getattr(ss, "random", None), "curve")


def _selection_curve(result, width: float, st):
    """The corrected estimate against η, for the left column under the funnel (None when
    the sensitivity to selection has nothing to show)."""
    from .figures import FigureUnavailable, selection_curve_flowable

    if not _has_selection_curve(result):
        return None
    try:
        return selection_curve_flowable(result, width, 84.0)
    except FigureUnavailable as exc:
        return para(f"The selection curve could not be drawn: {exc}", st["muted"])


def _selection_block(result, st) -> list:
    """How strong selection would have to be: the compact table, full width (its η curve
    is drawn under the funnel)."""
    sec = _paired(selection_strength_brief(result))
    if not sec.rows:
        return []
    return [_h2(sec.title, st), *section_table(sec, st, label_width=236)]


def _side_by_side(sec):
    """A table section printed with two of its rows to a line (its columns twice)."""
    if not sec.header or len(sec.rows) < 4:
        return sec
    half = (len(sec.rows) + 1) // 2
    blank = ("",) * len(sec.header)
    rows = tuple(
        tuple(sec.rows[i]) + (tuple(sec.rows[i + half]) if i + half < len(sec.rows) else blank)
        for i in range(half)
    )
    # numbers keep their room (a heading such as "Estimate" must not break); labels wrap
    widths = tuple(max(w, 1.15) if i else w for i, w in enumerate(sec.widths)) * 2
    # no row emphasis: a line now holds two settings; the default is named in its label
    return replace(sec, header=tuple(sec.header) * 2, rows=rows, widths=widths, emphasis=())


#: rows of the selection brief printed on one line: (first label, second label) -> label
_PAIRED_ROWS = {
    ("Fixed weights, one-tailed (moderate / severe)",
     "Fixed weights, two-tailed (moderate / severe)"):
        "Fixed weights (moderate / severe): one-; two-tailed",
    ("Missing trials found no effect", "Missing trials found the opposite effect"):
        "Missing trials found no effect; the opposite effect",
}  # fmt: skip


def _paired(sec):
    """The brief with its paired rows on one line each (fixed weights one- and two-tailed;
    missing trials with no effect and with the opposite effect), its notes in one
    paragraph: the same numbers in less height on the printed page."""
    rows, i = [], 0
    while i < len(sec.rows):
        label, value = sec.rows[i][0], sec.rows[i][1]
        if i + 1 < len(sec.rows):
            merged = _PAIRED_ROWS.get((label, sec.rows[i + 1][0]))
            if merged is not None:
                rows.append((merged, f"{value}; {sec.rows[i + 1][1]}"))
                i += 2
                continue
        rows.append((label, value))
        i += 1
    notes = (" ".join(sec.notes),) if sec.notes else ()
    return replace(sec, rows=tuple(rows), notes=notes)


def _page2(result, appraisal, st) -> list:
    out = _funnel_block(result, appraisal, st)
    out += _section(tests_section(result), st)
    out += _section(applicability_section(result), st)
    adj = adjustments_section(result)
    tf = trim_fill_section(result)
    rng = trim_fill_range(result)
    if tf is not None and rng is not None and rng.agree:
        # the settings agree: one sentence (which setting gives the lowest and highest
        # estimate) under the table is enough; the full table is printed when they disagree
        adj = replace(adj, notes=adj.notes + (rng.text,))
        tf = None
    out += _section(adj, st)
    if tf is not None:
        # two settings to a line: every setting in half the height, leaving room for how
        # strong selection would have to be
        out += _section(_side_by_side(tf), st)
    # how strong selection would have to be: the table here, its η curve under the funnel
    out += _selection_block(result, st)
    sens = sensitivity_section(result)
    # fail-safe N is not recommended (Cochrane Handbook 5.1, 10.4.4.3): the window and the
    # text show it with its caution; the printed sheet leaves it out to keep its room
    sens = replace(sens, rows=tuple(r for r in sens.rows if not r[0].startswith("Fail-safe")))
    out += _section(sens, st, label_width=200)
    # power is read out beside the funnel (simulated or not), so no separate block here
    return out


def _causes_for_print(sec):
    """Tick boxes where the appraiser has not judged a cause yet (the sheet is printed)."""
    rows = tuple((t, ev, CHECK_BOXES if j == NOT_JUDGED else j, n) for t, ev, j, n in sec.rows)
    return replace(sec, rows=rows, widths=(1.3, 5.7, 1.0, 1.4))


def _rating_for_print(sec, appraisal):
    from ..model.review import DOMAIN_RATINGS

    if appraisal.rating.override:
        return sec
    rows = [r for r in sec.rows if r[0] != "Appraiser's rating"]
    rows.append(("Appraiser's rating", "   ".join(f"☐ {r}" for r in DOMAIN_RATINGS)))
    rows.append(("Appraiser's reason", "\n\n"))
    return replace(sec, rows=tuple(rows))


def _page3(result, appraisal, st) -> list:
    out = _section(_causes_for_print(causes_section(appraisal)), st)
    claim = review_claim_section(result)
    if claim is not None:
        out += _section(claim, st, label_width=118)
    out += _section(_rating_for_print(rating_section(appraisal), appraisal), st)
    out += _settings(result, st)
    return out


def _settings(result, st) -> list:
    """The settings block in two columns; the fingerprint in full across the width."""
    from reportlab.lib import colors
    from reportlab.platypus import Table, TableStyle

    from ..figures import style as fstyle

    sec = settings_section(result)
    pairs = [r for r in sec.rows if not r[0].startswith("Data fingerprint")]
    fp = [r for r in sec.rows if r[0].startswith("Data fingerprint")]
    half = (len(pairs) + 1) // 2
    lw = 78.0
    vw = FRAME_W / 2 - lw
    data = []
    for i in range(half):
        row = []
        for pair in (pairs[i], pairs[i + half] if i + half < len(pairs) else None):
            if pair is None:
                row += ["", ""]
            else:
                row += [para(pair[0], st["cell_bold"]), para(pair[1], st["cell"])]
        data.append(row)
    for label, value in fp:
        data.append([para(label, st["cell_bold"]), para(value, st["cell"]), "", ""])
    t = Table(data, colWidths=[lw, vw, lw, vw], hAlign="LEFT")
    cmds = [
        ("VALIGN", (0, 0), (-1, -1), "TOP"),
        ("FONTNAME", (0, 0), (-1, -1), fonts.REGULAR),
        ("LEFTPADDING", (0, 0), (-1, -1), 3),
        ("RIGHTPADDING", (0, 0), (-1, -1), 3),
        ("TOPPADDING", (0, 0), (-1, -1), 1.4),
        ("BOTTOMPADDING", (0, 0), (-1, -1), 1.4),
        ("LINEBELOW", (0, 0), (-1, -1), 0.3, colors.HexColor(fstyle.RULE)),
    ]
    if fp:
        cmds.append(("SPAN", (1, len(data) - 1), (3, len(data) - 1)))
    t.setStyle(TableStyle(cmds))
    return [_h2(sec.title, st), t]


def _frame_page(flowables):
    from reportlab.platypus import KeepInFrame

    return KeepInFrame(FRAME_W, FRAME_H, flowables, mode="shrink", hAlign="LEFT", vAlign="TOP")


def build_sheet(
    result,
    *,
    include_forest: bool = False,
    date: str | _dt.date | None = None,
    timestamp: bool = False,
    appraisal=None,
) -> SheetBuild:
    """Build the appraisal sheet in memory.

    Parameters
    ----------
    result : Assessment or AnalysisResult
        The assessment to print (an analysis alone is read through
        :func:`lopside.assessment.assessment_of`: the sheet never appraises by itself).
    include_forest : bool
        Add the forest plot on its own page(s) after the three main pages.
    date : str or datetime.date, optional
        Date printed on the sheet (default today).
    timestamp : bool
        Write the creation date and a random document id into the PDF (off by default,
        so that the same analysis on the same date gives the same bytes).
    appraisal : Appraisal, optional
        Accepted for older callers; must be the appraisal of ``result``.

    Returns
    -------
    SheetBuild
    """
    from reportlab.lib.pagesizes import A4
    from reportlab.platypus import PageBreak, SimpleDocTemplate

    from ..assessment import Assessment, assessment_of

    assessment = assessment_of(result)
    if appraisal is not None and appraisal is not assessment.appraisal:
        assessment = Assessment(assessment.analysis, appraisal)
    result = assessment.analysis
    appraisal = assessment.appraisal
    fonts.register_fonts()
    st = layout.styles()
    if date is None:
        date = _dt.date.today()
    date = date.isoformat() if isinstance(date, _dt.date) else str(date)

    pages = [
        _frame_page(_page1(assessment, st, date)),
        _frame_page(_page2(result, appraisal, st)),
        _frame_page(_page3(result, appraisal, st)),
    ]
    story: list = []
    for i, p in enumerate(pages):
        story.append(p)
        if i < len(pages) - 1:
            story.append(PageBreak())
    n_forest = 0
    if include_forest:
        from .figures import FigureUnavailable, forest_flowables

        try:
            figs = forest_flowables(result, FRAME_W, FRAME_H - 24)
        except FigureUnavailable as exc:
            figs = []
            story += [PageBreak(), _h2("Forest plot", st)]
            story.append(para(f"The forest plot could not be drawn: {exc}", st["muted"]))
            n_forest = 1
        for j, fig in enumerate(figs):
            title = "Forest plot" + (f" (part {j + 1} of {len(figs)})" if len(figs) > 1 else "")
            story += [PageBreak(), _frame_page([_h2(title, st), fig])]
            n_forest += 1

    buf = io.BytesIO()
    title = result.review.details.title or "untitled review"
    doc = SimpleDocTemplate(
        buf,
        pagesize=A4,
        leftMargin=layout.MARGIN_X,
        rightMargin=layout.MARGIN_X,
        topMargin=layout.MARGIN_TOP,
        bottomMargin=layout.MARGIN_BOTTOM,
        title=f"Lopside appraisal sheet: {title}",
        author="Lopside",
        subject="Small-study effects and publication bias: appraisal sheet",
        creator=f"Lopside {__version__}",
        keywords=f"data SHA-256 {result.fingerprint}",
        invariant=0 if timestamp else 1,
        initialFontName=fonts.REGULAR,
        lang="en",
    )
    canvas_cls = _canvas_class(_footer_text(result, date), CAUTION)
    doc.build(story, canvasmaker=canvas_cls)
    pdf = buf.getvalue()
    shrink = tuple(float(getattr(p, "_scale", 1.0) or 1.0) for p in pages)
    n_pages = int(doc.page)
    return SheetBuild(pdf=pdf, pages=n_pages, shrink=shrink, forest_pages=n_forest)
