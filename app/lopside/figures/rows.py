"""A row-based figure engine shared by the forest plot and the cumulative plot.

Layout (all in inches, computed before drawing, so the figure grows in height with its
rows and nothing collides): a block of text columns on the left (label, then numeric
columns), the plot on the right, a caption line on top, and below the plot the effect
axis with "favours ..." words either side of the null and the axis title.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from . import style
from .common import effect_axis_label, fit_label, set_effect_axis, text_width_pt

if TYPE_CHECKING:  # pragma: no cover
    from matplotlib.figure import Figure


@dataclass(frozen=True, slots=True)
class Row:
    """One line of a row figure.

    ``kind`` is "study" (square sized by weight), "summary" (diamond), "point" (small
    diamond marker, cumulative steps), "pi" (prediction-interval bar), "header" (bold
    text only), "rule" (a thin line), or "spacer".
    """

    kind: str
    label: str = ""
    estimate: float = math.nan
    low: float = math.nan
    high: float = math.nan
    weight: float = math.nan
    cells: tuple[str, ...] = ()
    colour: str = style.INK
    hollow: bool = False
    height: float = 1.0
    bold: bool = False
    indent: bool = False


@dataclass(frozen=True, slots=True)
class Column:
    header: str
    align: str = "right"  # "left" or "right"
    #: left out (with ``dropped_note`` added to the caption) when the plot would
    #: otherwise get less than its minimum share of the width
    optional: bool = False
    dropped_note: str = ""


def _row_height_pt(font: float) -> float:
    return font * 1.6


@dataclass(slots=True)
class _Layout:
    """Where everything goes, in inches, computed before anything is drawn."""

    rows: list[Row]  # labels wrapped, dropped columns' cells removed
    columns: list[Column]  # those kept
    col_w: list[float]
    xs: list[float]  # left edge of each kept column
    dropped: list[Column]
    caption: str  # wrapped, with the dropped columns' notes
    footer: str  # wrapped
    fs: float
    fs_small: float
    row_pt: float
    W: float
    H: float
    margin: float
    x_label: float
    label_w: float
    plot_x0: float
    plot_x1: float
    x_lo: float
    x_hi: float
    line_in: float
    body_rows: float
    bottom: float
    foot_in: float


def draw_rows(
    rows: list[Row],
    columns: list[Column],
    *,
    measure: str,
    size: str = "column",
    caption: str = "",
    footer: str = "",
    label_header: str = "Study",
    left_words: str = "",
    right_words: str = "",
    null: float = 0.0,
    reference: float | None = None,
    reference_colour: str = style.INK,
    width: float | None = None,
    units: str = "",
) -> Figure:
    """Build a row figure (see module docstring) and return it.

    ``width`` (inches) lays the figure out for a given width instead of the size preset's
    (a window panel passes its own); the font stays the preset's. ``units`` goes on the
    effect axis title for mean differences.

    ``fig.lopside_artists`` holds "ax", "squares", "diamonds", "bars", "texts" (by row),
    "null", "layout" (column positions in inches) for tests.
    """
    from matplotlib.figure import Figure
    from matplotlib.transforms import blended_transform_factory

    lay = _layout(
        rows, columns, style.size_preset(size), width, caption, footer, label_header,
        (left_words, right_words), null, measure,
    )  # fmt: skip
    fs, W, H = lay.fs, lay.W, lay.H
    with style.style_context(fs):
        fig = Figure(figsize=(W, H))
        ax, centres = _axes(fig, lay, measure)
        tr_text = blended_transform_factory(fig.dpi_scale_trans, ax.transData)
        art: dict[str, Any] = {
            "ax": ax,
            "squares": [],
            "diamonds": [],
            "bars": [],
            "arrows": [],
            "texts": [],
            "layout": {
                "label_x": lay.x_label,
                "label_w": lay.label_w,
                "columns": list(zip(lay.xs, lay.col_w, strict=True)),
                "plot": (lay.plot_x0, lay.plot_x1),
                "row_pt": lay.row_pt,
                "height": H,
                "dropped": [c.header for c in lay.dropped],
            },
        }
        _draw_zebra(fig, lay, centres, tr_text)
        _draw_header(fig, lay, tr_text, label_header)
        # null and reference lines across the body
        art["null"] = ax.axvline(null, color=style.NULL_LINE, lw=style.LINE_WIDTH["null"], zorder=1)
        if reference is not None and np.isfinite(reference):
            ax.axvline(reference, color=reference_colour, lw=0.7, ls=(0, (2, 2)), zorder=1)
        _draw_body(fig, ax, lay, centres, tr_text, art)
        lines_used = _draw_favours(fig, ax, lay, null, left_words, right_words)
        label = effect_axis_label(measure, units)
        plot_pt = (lay.plot_x1 - lay.plot_x0) * 72.0
        loc = "center" if text_width_pt(label, fs) <= plot_pt else "right"
        ax.set_xlabel(label, fontsize=fs, labelpad=fs * 1.4 * lines_used + 1.0, loc=loc)
        if lay.footer:
            fig.text(
                lay.margin / W,
                0.04 / H,
                lay.footer,
                fontsize=lay.fs_small,
                color=style.MUTED,
                va="bottom",
                ha="left",
            )
        fig.lopside_artists = art
    return fig


def _layout(
    rows, columns, preset, width, caption, footer, label_header, words, null, measure
) -> _Layout:
    """Column widths, the label column, the x range and the heights of every band."""
    fs = preset.font
    fs_small = fs * 0.85
    row_pt = _row_height_pt(fs)
    W = float(width) if width else preset.width
    margin = 0.08
    gap_pt = fs * (0.7 if preset.name == "column" else 1.0)
    rows, columns, col_w, dropped, label_w = _fit_columns(
        rows, columns, label_header, W, fs, gap_pt, margin
    )
    notes = [c.dropped_note for c in dropped if c.dropped_note]
    if notes:
        caption = " \u00b7 ".join([caption, *notes]) if caption else " \u00b7 ".join(notes)
    # a label too long for its column goes onto two lines before anything is cut
    rows = [_wrap_label(r, label_w * 72.0 - (fs if r.indent else 0.0), fs) for r in rows]
    x_label = margin
    xs = []
    x = x_label + label_w + gap_pt / 72.0
    for w in col_w:
        xs.append(x)
        x += w + gap_pt / 72.0
    plot_x0 = x
    plot_x1 = W - margin

    # heights
    body_rows = sum(r.height for r in rows)
    line_in = row_pt / 72.0
    caption = wrap_words(caption, (W - 2 * margin) * 72.0, fs_small, sep=" \u00b7 ")
    footer = "\n".join(
        wrap_words(line, (W - 2 * margin) * 72.0, fs_small)
        for line in wrap_words(footer, (W - 2 * margin) * 72.0, fs_small, sep="  ").split("\n")
    )
    caption_lines = caption.count("\n") + 1 if caption else 0
    top = 0.06 + caption_lines * fs_small * 1.35 / 72.0 + line_in * 1.2  # caption + header
    # tick marks and labels, the "favours" words, the axis title
    x_lo, x_hi = _x_range(rows, null, measure)
    # do the "favours" words fit beside the null? If not, each gets its own line
    null_in = plot_x0 + (null - x_lo) / (x_hi - x_lo) * (plot_x1 - plot_x0)
    word_lines = 1
    for text, room in ((words[0], null_in - margin), (words[1], W - margin - null_in)):
        if text and text_width_pt(text + " \u2192", fs_small) > room * 72.0 - 2:
            word_lines = 2
    bottom = (7.0 + fs * 1.1 + fs * 1.4 * word_lines + fs * 1.6) / 72.0 + 0.04
    foot_in = (footer.count("\n") + 1) * fs_small * 1.4 / 72.0 if footer else 0.0
    H = top + body_rows * line_in + 0.12 + bottom + foot_in
    return _Layout(
        rows, columns, col_w, xs, dropped, caption, footer, fs, fs_small, row_pt, W, H,
        margin, x_label, label_w, plot_x0, plot_x1, x_lo, x_hi, line_in, body_rows, bottom,
        foot_in,
    )  # fmt: skip


def _fit_columns(rows, columns, label_header, W, fs, gap_pt, margin):
    """Text column widths and the label column's; optional columns dropped when the plot
    would otherwise get less than its share. Returns (rows, columns, col_w, dropped,
    label_w)."""
    col_w = []
    for j, col in enumerate(columns):
        widths = [text_width_pt(col.header, fs, "bold")]
        widths += [
            text_width_pt(r.cells[j], fs, "bold" if _bold_cells(r) else "normal")
            for r in rows
            if j < len(r.cells)
        ]
        col_w.append(max(widths) / 72.0)
    numeric_w = sum(col_w) + gap_pt / 72.0 * (len(columns) + 1)
    # the plot keeps at least a third of the width: a forest plot is read by its picture
    plot_min = (0.36 if W < 6.5 else 0.40) * W
    label_natural = (
        max(
            [text_width_pt(label_header, fs, "bold")]
            + [
                text_width_pt(r.label, fs, "bold" if r.bold else "normal") + (fs if r.indent else 0)
                for r in rows
            ]
        )
        / 72.0
    )
    # the pooled rows' names ("Random effects", "Prediction interval") and about eleven
    # characters of a study label always fit, even at the narrowest size
    fixed_names = [
        text_width_pt(r.label, fs, "bold" if r.bold else "normal")
        for r in rows
        if r.kind in ("summary", "pi", "header")
    ]
    label_min = min(label_natural, max([6.6 * fs] + fixed_names) / 72.0, 0.3 * W)
    label_room = W - 2 * margin - numeric_w - plot_min
    dropped = []
    while label_room < min(label_natural, max(label_min, 0.2 * W)) and any(
        c.optional for c in columns
    ):
        # too narrow for every column: an optional one (the weights, which the squares'
        # area also shows) goes before the labels or the plot are squeezed
        j = max(i for i, c in enumerate(columns) if c.optional)
        dropped.append(columns[j])
        columns = columns[:j] + columns[j + 1 :]
        col_w = col_w[:j] + col_w[j + 1 :]
        rows = [
            r if len(r.cells) <= j else _replace(r, cells=r.cells[:j] + r.cells[j + 1 :])
            for r in rows
        ]
        numeric_w = sum(col_w) + gap_pt / 72.0 * (len(columns) + 1)
        label_room = W - 2 * margin - numeric_w - plot_min
    label_w = max(min(label_natural, label_room), label_min)
    return rows, columns, col_w, dropped, label_w


def _x_range(rows, null: float, measure: str) -> tuple[float, float]:
    """The effect axis' range: every estimate, pooled interval and the null in view; very
    wide study intervals cut at the frame (with an arrow) so as not to squash the rest."""
    est = [r.estimate for r in rows if r.kind in ("study", "point") and np.isfinite(r.estimate)]
    core = est + [v for r in rows if r.kind in ("summary", "pi") for v in (r.low, r.high)]
    core += [null]
    core = [v for v in core if np.isfinite(v)]
    lows = [r.low for r in rows if np.isfinite(r.low)] or core
    highs = [r.high for r in rows if np.isfinite(r.high)] or core
    c_lo, c_hi = min(core), max(core)
    span = max(c_hi - c_lo, 0.2 if measure.upper() in ("OR", "RR", "HR") else 1e-3)
    # very wide study intervals are cut at the frame (with an arrow) so that they do
    # not squash everything else
    halves = [(r.high - r.low) / 2 for r in rows if r.kind in ("study", "point")]
    halves = [h for h in halves if np.isfinite(h)]
    reach = max(span, 1.6 * float(np.median(halves))) if halves else span
    x_lo = max(min(lows), c_lo - reach)
    x_hi = min(max(highs), c_hi + reach)
    # ... but the null, every estimate and every pooled interval always stay in view
    x_lo, x_hi = min(x_lo, c_lo), max(x_hi, c_hi)
    if not x_hi > x_lo:  # nothing but the null line (no study): a range of zero width
        x_lo, x_hi = c_lo - span / 2, c_hi + span / 2
    pad = 0.05 * (x_hi - x_lo)
    return x_lo - pad, x_hi + pad


def _axes(fig, lay: _Layout, measure: str):
    """The plot's axes (rows counted down from 0 at the top of the body) and the centre
    of each row in those units."""
    W, H = lay.W, lay.H
    ax_bottom = (lay.bottom + lay.foot_in) / H
    ax_h = (lay.body_rows * lay.line_in + 0.12) / H
    ax = fig.add_axes((lay.plot_x0 / W, ax_bottom, (lay.plot_x1 - lay.plot_x0) / W, ax_h))
    # row centres in "row units": 0 at the top of the body
    centres = []
    ypos = 0.0
    for r in lay.rows:
        centres.append(ypos + r.height / 2)
        ypos += r.height
    pad_rows = 0.12 / lay.line_in
    ax.set_ylim(lay.body_rows + pad_rows, 0.0)

    # ticks whose labels, as drawn, keep a space between them
    set_effect_axis(
        ax,
        measure,
        lay.x_lo,
        lay.x_hi,
        "x",
        max_ticks=7,
        axis_pt=(lay.plot_x1 - lay.plot_x0) * 72.0,
        font_pt=lay.fs * 0.9,
    )
    ax.set_autoscale_on(False)
    ax.spines["left"].set_visible(False)
    ax.set_facecolor("none")  # let the zebra shading show through
    ax.set_yticks([])
    ax.tick_params(axis="x", labelsize=lay.fs * 0.9)
    return ax, centres


def _draw_zebra(fig, lay: _Layout, centres, tr_text) -> None:
    """Zebra shading on study rows: guides the eye along a long table."""
    from matplotlib.patches import Rectangle

    zebra = 0
    for r, c in zip(lay.rows, centres, strict=True):
        if r.kind in ("study", "point"):
            if zebra % 2 == 1:
                fig.patches.append(
                    Rectangle(
                        (lay.margin, c - r.height / 2),
                        lay.W - 2 * lay.margin,
                        r.height,
                        transform=tr_text,
                        facecolor=style.BAND_RAMP[0],
                        edgecolor="none",
                        zorder=-1,
                    )
                )
            zebra += 1
        else:
            zebra = 0


def _draw_header(fig, lay: _Layout, tr_text, label_header: str) -> None:
    """The header row (label and column headings, a rule under them) and the caption."""
    fs, margin, W = lay.fs, lay.margin, lay.W
    head_y = -0.75
    fig.text(
        lay.x_label,
        head_y,
        label_header,
        transform=tr_text,
        fontsize=fs,
        fontweight="bold",
        color=style.INK,
        va="center",
        ha="left",
    )
    for (xc, wc), col in zip(zip(lay.xs, lay.col_w, strict=True), lay.columns, strict=True):
        fig.text(
            xc + (wc if col.align == "right" else 0.0),
            head_y,
            col.header,
            transform=tr_text,
            fontsize=fs,
            fontweight="bold",
            color=style.INK,
            va="center",
            ha=col.align,
        )
    fig.lines.append(_hline(fig, tr_text, margin, W - margin, -0.15, style.RULE, 0.6))
    if lay.caption:
        fig.text(
            margin / W,
            1.0 - 0.05 / lay.H,
            lay.caption,
            fontsize=lay.fs_small,
            color=style.MUTED,
            va="top",
            ha="left",
        )


def _draw_body(fig, ax, lay: _Layout, centres, tr_text, art: dict[str, Any]) -> None:
    """Each row: its label and cells, then its mark (square, diamond, point or bar)."""
    s_max = (0.85 * lay.row_pt) ** 2
    rows = lay.rows
    wmax = max([r.weight for r in rows if r.kind == "study" and np.isfinite(r.weight)] or [1.0])
    for r, c in zip(rows, centres, strict=True):
        if r.kind == "rule":
            fig.lines.append(
                _hline(fig, tr_text, lay.margin, lay.W - lay.margin, c, style.RULE, 0.6)
            )
            art["texts"].append([])
            continue
        art["texts"].append(_row_texts(fig, lay, r, c, tr_text))
        if not np.isfinite(r.estimate) and r.kind != "pi":
            continue
        _row_mark(ax, lay, r, c, art, s_max, wmax)


def _row_texts(fig, lay: _Layout, r: Row, c: float, tr_text) -> list:
    """A row's label (fitted to its room) and its cells."""
    fs, x_label = lay.fs, lay.x_label
    row_texts = []
    if r.label:
        room = lay.label_w * 72.0 - (fs if r.indent else 0.0)
        if r.kind == "header":  # a group's name has its line to itself
            room = (lay.plot_x0 - x_label) * 72.0
        weight = "bold" if r.bold else "normal"
        text = "\n".join(fit_label(x, room, fs, weight) for x in r.label.split("\n"))
        row_texts.append(
            fig.text(
                x_label + (fs / 72.0 if r.indent else 0.0),
                c,
                text,
                transform=tr_text,
                fontsize=fs,
                fontweight=weight,
                color=style.INK,
                va="center",
                ha="left",
            )
        )
    for j, cell in enumerate(r.cells):
        if not cell or j >= len(lay.columns):
            continue
        xc, wc = lay.xs[j], lay.col_w[j]
        row_texts.append(
            fig.text(
                xc + (wc if lay.columns[j].align == "right" else 0.0),
                c,
                cell,
                transform=tr_text,
                fontsize=fs,
                fontweight="bold" if _bold_cells(r) else "normal",
                color=style.INK,
                va="center",
                ha=lay.columns[j].align,
            )
        )
    return row_texts


def _row_mark(ax, lay: _Layout, r: Row, c: float, art, s_max: float, wmax: float) -> None:
    """A study's square or a step's point with its interval, a pooled diamond, or a
    prediction-interval bar."""
    from matplotlib.patches import Polygon

    lo, hi = r.low, r.high
    if r.kind in ("study", "point"):
        if np.isfinite(lo) and np.isfinite(hi):
            _interval(ax, lay, r, c, art)
        if r.kind == "study":
            w = r.weight if np.isfinite(r.weight) else wmax
            area = max(s_max * w / wmax, 0.04 * s_max)
            sq = ax.scatter(
                [r.estimate],
                [c],
                s=[area],
                marker="s",
                c=r.colour,
                edgecolors="none",
                zorder=3,
            )
        else:
            sq = ax.scatter(
                [r.estimate],
                [c],
                s=[(0.55 * lay.row_pt) ** 2],
                marker="D",
                c=r.colour,
                edgecolors=style.PAPER,
                linewidths=0.5,
                zorder=3,
            )
        art["squares"].append(sq)
    elif r.kind == "summary":
        half = 0.36 * r.height
        poly = Polygon(
            [(lo, c), (r.estimate, c - half), (hi, c), (r.estimate, c + half)],
            closed=True,
            facecolor=style.PAPER if r.hollow else r.colour,
            edgecolor=r.colour,
            lw=1.0,
            zorder=3,
        )
        ax.add_patch(poly)
        art["diamonds"].append(poly)
    elif r.kind == "pi" and np.isfinite(lo) and np.isfinite(hi):
        (bar,) = ax.plot([lo, hi], [c, c], color=r.colour, lw=2.2, solid_capstyle="butt", zorder=2)
        for end in (lo, hi):
            ax.plot([end, end], [c - 0.28, c + 0.28], color=r.colour, lw=1.0, zorder=2)
        art["bars"].append(bar)


def _interval(ax, lay: _Layout, r: Row, c: float, art) -> None:
    """A study's interval, cut at the frame with an arrow where it runs past it."""
    lo, hi, x_lo, x_hi = r.low, r.high, lay.x_lo, lay.x_hi
    a, b = max(lo, x_lo), min(hi, x_hi)
    (ln,) = ax.plot([a, b], [c, c], color=r.colour, lw=style.LINE_WIDTH["ci"], zorder=2)
    art["bars"].append(ln)
    for side, cut, mk in ((lo < x_lo, x_lo, "<"), (hi > x_hi, x_hi, ">")):
        if side:
            (arrow,) = ax.plot(
                [cut],
                [c],
                marker=mk,
                ms=lay.fs * 0.55,
                color=r.colour,
                zorder=2.5,
                clip_on=False,
            )
            art["arrows"].append(arrow)


def _draw_favours(fig, ax, lay: _Layout, null, left_words, right_words) -> int:
    """Words either side of the null, under the tick labels; the lines they take."""
    from matplotlib.transforms import ScaledTranslation, blended_transform_factory

    fs_small, margin, W = lay.fs_small, lay.margin, lay.W
    x_lo, x_hi, plot_x0, plot_x1 = lay.x_lo, lay.x_hi, lay.plot_x0, lay.plot_x1
    words_y = -(7.0 + lay.fs * 1.15) / 72.0
    tr_words = blended_transform_factory(ax.transData, ax.transAxes)
    off = ScaledTranslation(0, words_y, fig.dpi_scale_trans)
    nudge = (x_hi - x_lo) * 0.015
    to_in = ax.transData.transform
    null_px = to_in((null, 0))[0]
    left_room = (null_px - fig.dpi_scale_trans.transform((margin, 0))[0]) * 72.0 / fig.dpi
    right_room = (fig.dpi_scale_trans.transform((W - margin, 0))[0] - null_px) * 72.0 / fig.dpi
    lines_used = 1
    line_pt = fs_small * 1.25
    sides = []
    for words, room, sign in ((left_words, left_room, -1), (right_words, right_room, 1)):
        if not words:
            continue
        txt = ("\u2190 " + words) if sign < 0 else (words + " \u2192")
        beside = x_lo < null + sign * nudge < x_hi and text_width_pt(txt, fs_small) <= room - 2
        sides.append((txt, sign, beside))
    if all(beside for _t, _s, beside in sides):
        for txt, sign, _b in sides:
            ha = "right" if sign < 0 else "left"
            fig.texts.append(_text(fig, null + sign * nudge, 0, txt, tr_words + off, fs_small, ha))
        return lines_used
    # no room beside the null: each phrase goes to its own end of the plot (the
    # left words at the left end, the right words at the right end), on one line
    # when both fit, else the right-hand phrase on a second line
    plot_pt = (plot_x1 - plot_x0) * 72.0
    total = sum(text_width_pt(t, fs_small) for t, _s, _b in sides) + fs_small * 2
    for txt, sign, _b in sides:
        row = 1 if (sign > 0 and total > plot_pt and len(sides) == 2) else 0
        lines_used = max(lines_used, row + 1)
        y_off = ScaledTranslation(0, words_y - row * line_pt / 72.0, fig.dpi_scale_trans)
        tr = blended_transform_factory(fig.dpi_scale_trans, ax.transAxes) + y_off
        # on a line of its own a phrase may run past the plot's other end
        room_pt = (W - margin - plot_x0 if sign < 0 else plot_x1 - margin) * 72.0
        fit = fit_label(txt, plot_pt if row == 0 and sign > 0 else room_pt, fs_small)
        edge = plot_x0 if sign < 0 else plot_x1
        t = _text(fig, edge, 0, fit, tr, fs_small, "left" if sign < 0 else "right")
        fig.texts.append(t)
    return lines_used


def _hline(fig, transform, x0, x1, y, colour, lw):
    from matplotlib.lines import Line2D

    return Line2D([x0, x1], [y, y], transform=transform, color=colour, lw=lw, figure=fig)


def _text(fig, x, y, s, transform, size, ha):
    from matplotlib.text import Text

    t = Text(x, y, s, transform=transform, fontsize=size, color=style.MUTED, ha=ha, va="top")
    t.set_figure(fig)
    return t


def _replace(r: Row, **kw) -> Row:
    from dataclasses import replace

    return replace(r, **kw)


def _wrap_label(r: Row, room_pt: float, fs: float) -> Row:
    """The row with its label on two lines (and a taller row) when it is too long for one."""
    from dataclasses import replace

    weight = "bold" if r.bold else "normal"
    if not r.label or text_width_pt(r.label, fs, weight) <= room_pt or r.kind == "header":
        return r
    words = r.label.split()
    if len(words) > 2 and len(words[0]) == 1 and not words[0].isalnum():
        words = [f"{words[0]} {words[1]}", *words[2:]]  # "+ Name" stays together
    if len(words) < 2:
        return r
    # the longest first line that fits; the rest (with the year) on the second
    first = words[0]
    for i in range(1, len(words)):
        cand = " ".join(words[: i + 1])
        if text_width_pt(cand, fs, weight) > room_pt:
            break
        first = cand
    rest = r.label[len(first) :].strip()
    if not rest:
        return r
    return replace(r, label=f"{first}\n{rest}", height=max(r.height, 1.75))


def _bold_cells(r: Row) -> bool:
    return r.kind == "summary" and not r.hollow


def wrap_words(text: str, width_pt: float, size: float, sep: str = " ") -> str:
    """Break ``text`` into lines no wider than ``width_pt``, at ``sep`` where possible."""
    if not text:
        return text
    out_lines = []
    for para in text.split("\n"):
        parts = para.split(sep)
        line = ""
        for part in parts:
            cand = part if not line else line + sep + part
            if line and text_width_pt(cand, size) > width_pt:
                out_lines.append(line)
                line = part
            else:
                line = cand
        out_lines.append(line)
    return "\n".join(out_lines)


def _fit_words(text: str, width_pt: float, size: float) -> str:
    """One line if it fits, else two (broken at a space), else shortened with an ellipsis."""
    if text_width_pt(text, size) <= width_pt:
        return text
    wrapped = wrap_words(text, width_pt, size)
    lines = wrapped.split("\n")
    if len(lines) == 2 and all(text_width_pt(x, size) <= width_pt for x in lines):
        return wrapped
    first = lines[0]
    rest = " ".join(lines[1:])
    return first + "\n" + fit_label(rest, width_pt, size)
