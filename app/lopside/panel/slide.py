"""One 16:9 slide for a journal club: the contour funnel, a three-line reading, the caution.

The same content is written as PPTX (python-pptx, for PowerPoint or LibreOffice) or drawn
as a PNG (matplotlib) for those without a presentation program. The reading's words come
from :func:`lopside.panel.reading_lines`; the figure from the shared funnel builder.
"""

from __future__ import annotations

import datetime as _dt
import io
import os
from pathlib import Path

from .. import CAUTION, __version__
from ..appraise.rating import unrated_because
from . import reading_lines
from .export import _atomic

#: slide size: 16:9 at 13.333 x 7.5 inches (PowerPoint's widescreen)
WIDTH_IN, HEIGHT_IN = 13.333, 7.5
HEADINGS = (
    "What the funnel shows",
    "What the tests and adjustments say",
    "What else could explain it",
)


def _funnel_png(result, dpi: int = 200) -> bytes:
    from ..figures.adaptors import funnel_input_from_result
    from ..figures.export import figure_bytes
    from ..figures.funnel import FunnelOptions, funnel_figure

    rob = {x for x in result.data.risk_of_bias if x}
    opts = FunnelOptions(colour_by="risk_of_bias" if len(rob) >= 2 else "none")
    fig = funnel_figure(funnel_input_from_result(result, opts), opts, size="column")
    return figure_bytes(fig, "png", dpi=dpi)


def slide_texts(result, appraisal, title: str, date: str) -> dict[str, object]:
    """Everything the slide says (one place for PPTX and PNG)."""
    fp = (result.fingerprint or "")[:12]
    rating = appraisal.rating
    return {
        "title": title,
        "lines": list(zip(HEADINGS, reading_lines(result, appraisal))),
        "rating": (
            f"Suggested rating of the publication-bias domain: {rating.suggested}"
            + (f": {why}" if (why := unrated_because(rating)) else "")
            + (f"; the appraiser's: {rating.override}" if rating.override else "")
        ),
        "caution": CAUTION,
        "footer": f"Lopside {__version__} · {date} · data SHA-256 {fp}… · k = {result.k}",
    }


def write_slide(result, appraisal, path: str | os.PathLike[str], *, title: str, date=None) -> Path:
    """Write the slide as .pptx or .png (by suffix), atomically."""
    out = Path(path)
    date = str(date or _dt.date.today().isoformat())
    if result.k == 0:
        raise ValueError("no study has an effect and standard error, so there is no funnel")
    texts = slide_texts(result, appraisal, title, date)
    png = _funnel_png(result)
    suffix = out.suffix.lower()
    if suffix == ".pptx":
        _atomic(out, lambda tmp: _pptx(texts, png, tmp))
    elif suffix == ".png":
        _atomic(out, lambda tmp: _png(texts, png, tmp))
    else:
        raise ValueError(
            f"{out.name}: the slide is written as .pptx or .png; '{suffix or 'none'}' is neither"
        )
    return out


def _pptx(texts, png: bytes, tmp: Path) -> None:
    from pptx import Presentation
    from pptx.dml.color import RGBColor
    from pptx.util import Inches, Pt

    prs = Presentation()
    prs.slide_width, prs.slide_height = Inches(WIDTH_IN), Inches(HEIGHT_IN)
    slide = prs.slides.add_slide(prs.slide_layouts[6])  # blank
    ink = RGBColor(0x1F, 0x29, 0x33)
    teal = RGBColor(0x2E, 0x7F, 0x75)

    def box(x, y, w, h):
        tb = slide.shapes.add_textbox(Inches(x), Inches(y), Inches(w), Inches(h))
        tb.text_frame.word_wrap = True
        return tb.text_frame

    tf = box(0.5, 0.25, 12.3, 0.95)
    tf.text = str(texts["title"])
    tf.paragraphs[0].runs[0].font.size = Pt(24)
    tf.paragraphs[0].runs[0].font.bold = True
    tf.paragraphs[0].runs[0].font.color.rgb = ink
    slide.shapes.add_picture(io.BytesIO(png), Inches(0.5), Inches(1.35), height=Inches(4.8))
    tf = box(6.6, 1.35, 6.3, 4.8)
    first = True
    for heading, text in texts["lines"]:
        p = tf.paragraphs[0] if first else tf.add_paragraph()
        first = False
        r = p.add_run()
        r.text = heading
        r.font.bold = True
        r.font.size = Pt(15)
        r.font.color.rgb = teal
        p2 = tf.add_paragraph()
        r2 = p2.add_run()
        r2.text = text
        r2.font.size = Pt(13)
        r2.font.color.rgb = ink
    p = tf.add_paragraph()
    r = p.add_run()
    r.text = str(texts["rating"])
    r.font.size = Pt(13)
    r.font.bold = True
    tf = box(0.5, 6.3, 12.3, 0.7)
    r = tf.paragraphs[0].add_run()
    r.text = "Caution. " + str(texts["caution"])
    r.font.size = Pt(10)
    tf = box(0.5, 7.0, 12.3, 0.35)
    r = tf.paragraphs[0].add_run()
    r.text = str(texts["footer"])
    r.font.size = Pt(8)
    prs.save(tmp)


def _png(texts, png: bytes, tmp: Path) -> None:
    import textwrap

    from matplotlib.figure import Figure
    from matplotlib.image import imread

    from ..figures import style

    fig = Figure(figsize=(WIDTH_IN, HEIGHT_IN), dpi=100)
    fig.patch.set_facecolor("white")
    title = textwrap.fill(str(texts["title"]), 64)
    fig.text(0.04, 0.95, title, fontsize=22, weight="bold", color=style.INK, va="top")
    ax = fig.add_axes((0.03, 0.13, 0.45, 0.68))
    ax.imshow(imread(io.BytesIO(png), format="png"))
    ax.set_axis_off()
    y = 0.82
    line_h = 11.5 * 1.35 / (HEIGHT_IN * 72)
    for heading, text in texts["lines"]:
        fig.text(0.51, y, heading, fontsize=14, weight="bold", color=style.BAND_EDGE, va="top")
        y -= 0.05
        wrapped = textwrap.fill(str(text), 68)
        fig.text(0.51, y, wrapped, fontsize=11.5, va="top", color=style.INK)
        y -= line_h * (wrapped.count("\n") + 1) + 0.035
    rating = textwrap.fill(str(texts["rating"]), 62)
    fig.text(0.51, y, rating, fontsize=12, weight="bold", color=style.INK, va="top")
    fig.text(
        0.04,
        0.09,
        textwrap.fill("Caution. " + str(texts["caution"]), 170),
        fontsize=9,
        va="top",
        color=style.INK,
    )
    fig.text(0.04, 0.02, str(texts["footer"]), fontsize=7.5, color=style.MUTED)
    fig.savefig(tmp, format="png", dpi=100, metadata={"Software": None})
