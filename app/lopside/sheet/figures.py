"""The sheet's figures: the shared matplotlib builders, embedded as vector drawings.

A figure is drawn by matplotlib straight onto the sheet's reportlab canvas
(:mod:`lopside.sheet.vector`), its text set in the embedded DejaVu font, so labels stay
searchable in the PDF. A figure that renderer cannot draw is saved as SVG with its text
kept as text and converted by svglib into a reportlab drawing; if svglib is missing or
fails on it, a 300-dpi PNG is embedded instead. A figure that cannot be drawn for these
data becomes a short message, never an error.
"""

from __future__ import annotations

import io
import math
from dataclasses import replace

from . import fonts

PNG_DPI = 300
#: Study rows per forest-plot page (A4 portrait at the "page" size; the figure is
#: scaled down a little if a page still overflows).
FOREST_ROWS_PER_PAGE = 46


class FigureUnavailable(Exception):
    """The figure could not be drawn; ``str(exc)`` says why, in plain words."""


def _to_flowable(fig, max_width: float, max_height: float):
    """A matplotlib Figure as a reportlab flowable scaled to fit (vector if possible)."""
    from ..figures.export import figure_bytes

    fonts.register_fonts()
    w_pt = fig.get_figwidth() * 72.0
    h_pt = fig.get_figheight() * 72.0
    scale = min(1.0, max_width / w_pt, max_height / h_pt)
    try:
        from .vector import drawable, figure_flowable

        if drawable(fig):
            return figure_flowable(fig, scale)
    except ImportError:  # pragma: no cover - matplotlib without its PDF/PS renderer base
        pass
    try:
        from svglib.svglib import svg2rlg

        drawing = svg2rlg(io.BytesIO(figure_bytes(fig, "svg")))
        if drawing is None:
            raise ValueError("svglib returned nothing")
        # the renderer starts every drawing in its default font; make that the embedded
        # one so the PDF references no unembedded Helvetica
        drawing.initialFontName = fonts.REGULAR
        if scale < 1.0:
            drawing.scale(scale, scale)
            drawing.width *= scale
            drawing.height *= scale
        return drawing
    except Exception:  # noqa: BLE001 - any failure of the optional vector path falls back to PNG
        from reportlab.platypus import Image

        png = figure_bytes(fig, "png", dpi=PNG_DPI)
        return Image(io.BytesIO(png), width=w_pt * scale, height=h_pt * scale)


def funnel_flowable(result, max_width: float, max_height: float):
    """The contour-enhanced funnel plot of the analysis (trim-and-fill studies hollow).

    Studies are coloured by risk of bias when at least two levels were entered, so the
    reader can see whether the lopsided part is the high-risk part.

    Raises
    ------
    FigureUnavailable
    """
    try:
        from ..figures.adaptors import funnel_input_from_result
        from ..figures.funnel import FunnelOptions, funnel_figure
    except ImportError as exc:  # pragma: no cover - figures are part of the product
        raise FigureUnavailable(f"the funnel builder is not available ({exc})") from exc
    from ..figures.common import FigureInputError

    rob = {x for x in result.data.risk_of_bias if x}
    opts = FunnelOptions(colour_by="risk_of_bias" if len(rob) >= 2 else "none")
    try:
        inp = funnel_input_from_result(result, opts)
        fig = funnel_figure(inp, opts, size="column")
        from ..figures.flag_marks import flagged_points, mark_flagged  # rows to check

        mark_flagged(fig.axes[0], flagged_points(result, opts.axis), size="column")
    except (FigureInputError, ValueError) as exc:
        raise FigureUnavailable(str(exc)) from exc
    return _to_flowable(fig, max_width, max_height)


def forest_flowables(result, max_width: float, max_height: float) -> list:
    """The forest plot, split over as many pages as the studies need.

    Every page but the last shows only studies; the last adds the pooled rows. A subgroup's
    subtotal appears on the page where its last study is.

    Raises
    ------
    FigureUnavailable
    """
    try:
        from ..figures.adaptors import forest_input_from_result
        from ..figures.forest import ForestPooled, forest_figure
    except ImportError as exc:  # pragma: no cover
        raise FigureUnavailable(f"the forest builder is not available ({exc})") from exc
    from ..figures.common import FigureInputError

    try:
        rows, pooled, opts = forest_input_from_result(result)
    except (FigureInputError, ValueError) as exc:
        raise FigureUnavailable(str(exc)) from exc
    rows = list(rows)
    if not rows:
        raise FigureUnavailable("no study has a usable effect and standard error")
    # keep each subgroup's studies together in display order
    order: list[str] = []
    for r in rows:
        if r.group not in order:
            order.append(r.group)
    rows = [r for g in order for r in rows if r.group == g]
    n_groups = len(order) if (len(order) > 1 or order[0]) else 0
    per_page = FOREST_ROWS_PER_PAGE - (2 * n_groups if n_groups else 0)
    per_page = max(per_page, 20)
    # as many pages as needed, with the studies shared evenly between them
    n_pages = math.ceil(len(rows) / per_page)
    size = math.ceil(len(rows) / n_pages)
    chunks = [rows[i : i + size] for i in range(0, len(rows), size)]
    subtotals = dict(pooled.subtotals)
    out = []
    total = len(rows)
    start = 0
    for n, chunk in enumerate(chunks):
        last = n == len(chunks) - 1
        later = {r.group for c in chunks[n + 1 :] for r in c}
        ends_here = [g for g in order if g in {r.group for r in chunk} and g not in later]
        part = (
            replace(pooled, subtotals=tuple((g, subtotals.get(g)) for g in ends_here))
            if last
            else ForestPooled(
                subtotals=tuple((g, subtotals.get(g)) for g in ends_here),
                subtotal_model=pooled.subtotal_model,
                note="Continued on the next page.",
            )
        )
        caption = opts.caption
        if len(chunks) > 1:
            base = _default_caption(opts, pooled, total)
            caption = f"{base} · studies {start + 1}–{start + len(chunk)} of {total}"
        o = replace(opts, size="page", caption=caption)
        try:
            fig = forest_figure(tuple(chunk), part, o)
        except (FigureInputError, ValueError) as exc:
            raise FigureUnavailable(str(exc)) from exc
        out.append(_to_flowable(fig, max_width, max_height))
        start += len(chunk)
    return out


def _default_caption(opts, pooled, k: int) -> str:
    from ..figures import forest

    make = getattr(forest, "_caption", None)
    if make is None:  # pragma: no cover
        return f"{opts.measure} · k = {k}"
    return make(opts, pooled, k)


def selection_curve_flowable(result, max_width: float, max_height: float):
    """The corrected estimate against η (Mathur & VanderWeele 2020), or FigureUnavailable."""
    from ..figures.common import FigureInputError
    from ..figures.selection import selection_curve_figure, selection_curve_input_from_result

    inp = selection_curve_input_from_result(result)
    if inp is None:
        raise FigureUnavailable("the sensitivity to selection was not computed")
    try:
        fig = selection_curve_figure(inp, size="column")
    except (FigureInputError, ValueError) as exc:
        raise FigureUnavailable(str(exc)) from exc
    return _to_flowable(fig, max_width, max_height)
