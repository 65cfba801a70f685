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
    from matplotlib.patches import Polygon, Rectangle
    from matplotlib.transforms import blended_transform_factory

    preset = style.size_preset(size)
    fs = preset.font
    fs_small = fs * 0.85
    row_pt = _row_height_pt(fs)
    W = float(width) if width else preset.width
    margin = 0.08
    gap_pt = fs * (0.7 if preset.name == "column" else 1.0)

    # ---------------------------------------------------------------- column widths
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
    notes = [c.dropped_note for c in dropped if c.dropped_note]
    if notes:
        caption = " \u00b7 ".join([caption, *notes]) if caption else " \u00b7 ".join(notes)
    label_w = max(min(label_natural, label_room), label_min)
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

    # ---------------------------------------------------------------- heights
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
    # ------------------------------------------------------------ x range
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
    x_lo, x_hi = x_lo - pad, x_hi + pad
    # do the "favours" words fit beside the null? If not, each gets its own line
    null_in = plot_x0 + (null - x_lo) / (x_hi - x_lo) * (plot_x1 - plot_x0)
    word_lines = 1
    for words, room in ((left_words, null_in - margin), (right_words, W - margin - null_in)):
        if words and text_width_pt(words + " \u2192", fs_small) > room * 72.0 - 2:
            word_lines = 2
    bottom = (7.0 + fs * 1.1 + fs * 1.4 * word_lines + fs * 1.6) / 72.0 + 0.04
    foot_in = (footer.count("\n") + 1) * fs_small * 1.4 / 72.0 if footer else 0.0
    H = top + body_rows * line_in + 0.12 + bottom + foot_in

    with style.style_context(fs):
        fig = Figure(figsize=(W, H))
        ax_bottom = (bottom + foot_in) / H
        ax_h = (body_rows * line_in + 0.12) / H
        ax = fig.add_axes((plot_x0 / W, ax_bottom, (plot_x1 - plot_x0) / W, ax_h))
        # row centres in "row units": 0 at the top of the body
        centres = []
        ypos = 0.0
        for r in rows:
            centres.append(ypos + r.height / 2)
            ypos += r.height
        pad_rows = 0.12 / line_in
        ax.set_ylim(body_rows + pad_rows, 0.0)

        # ticks whose labels, as drawn, keep a space between them
        set_effect_axis(
            ax,
            measure,
            x_lo,
            x_hi,
            "x",
            max_ticks=7,
            axis_pt=(plot_x1 - plot_x0) * 72.0,
            font_pt=fs * 0.9,
        )
        ax.set_autoscale_on(False)
        ax.spines["left"].set_visible(False)
        ax.set_facecolor("none")  # let the zebra shading show through
        ax.set_yticks([])
        ax.tick_params(axis="x", labelsize=fs * 0.9)

        tr_text = blended_transform_factory(fig.dpi_scale_trans, ax.transData)
        art: dict[str, Any] = {
            "ax": ax,
            "squares": [],
            "diamonds": [],
            "bars": [],
            "arrows": [],
            "texts": [],
            "layout": {
                "label_x": x_label,
                "label_w": label_w,
                "columns": list(zip(xs, col_w, strict=True)),
                "plot": (plot_x0, plot_x1),
                "row_pt": row_pt,
                "height": H,
                "dropped": [c.header for c in dropped],
            },
        }

        # zebra shading on study rows: guides the eye along a long table
        zebra = 0
        for r, c in zip(rows, centres, strict=True):
            if r.kind in ("study", "point"):
                if zebra % 2 == 1:
                    fig.patches.append(
                        Rectangle(
                            (margin, c - r.height / 2),
                            W - 2 * margin,
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

        # header row
        head_y = -0.75
        fig.text(
            x_label,
            head_y,
            label_header,
            transform=tr_text,
            fontsize=fs,
            fontweight="bold",
            color=style.INK,
            va="center",
            ha="left",
        )
        for (xc, wc), col in zip(zip(xs, col_w, strict=True), columns, strict=True):
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
        if caption:
            fig.text(
                margin / W,
                1.0 - 0.05 / H,
                caption,
                fontsize=fs_small,
                color=style.MUTED,
                va="top",
                ha="left",
            )

        # null and reference lines across the body
        art["null"] = ax.axvline(null, color=style.NULL_LINE, lw=style.LINE_WIDTH["null"], zorder=1)
        if reference is not None and np.isfinite(reference):
            ax.axvline(reference, color=reference_colour, lw=0.7, ls=(0, (2, 2)), zorder=1)

        s_max = (0.85 * row_pt) ** 2
        wmax = max([r.weight for r in rows if r.kind == "study" and np.isfinite(r.weight)] or [1.0])
        for r, c in zip(rows, centres, strict=True):
            row_texts = []
            if r.kind == "rule":
                fig.lines.append(_hline(fig, tr_text, margin, W - margin, c, style.RULE, 0.6))
                art["texts"].append(row_texts)
                continue
            if r.label:
                room = label_w * 72.0 - (fs if r.indent else 0.0)
                if r.kind == "header":  # a group's name has its line to itself
                    room = (plot_x0 - x_label) * 72.0
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
                if not cell or j >= len(columns):
                    continue
                xc, wc = xs[j], col_w[j]
                row_texts.append(
                    fig.text(
                        xc + (wc if columns[j].align == "right" else 0.0),
                        c,
                        cell,
                        transform=tr_text,
                        fontsize=fs,
                        fontweight="bold" if _bold_cells(r) else "normal",
                        color=style.INK,
                        va="center",
                        ha=columns[j].align,
                    )
                )
            art["texts"].append(row_texts)
            if not np.isfinite(r.estimate) and r.kind != "pi":
                continue
            lo, hi = r.low, r.high
            if r.kind in ("study", "point"):
                if np.isfinite(lo) and np.isfinite(hi):
                    a, b = max(lo, x_lo), min(hi, x_hi)
                    (ln,) = ax.plot(
                        [a, b], [c, c], color=r.colour, lw=style.LINE_WIDTH["ci"], zorder=2
                    )
                    art["bars"].append(ln)
                    for side, cut, mk in ((lo < x_lo, x_lo, "<"), (hi > x_hi, x_hi, ">")):
                        if side:
                            (arrow,) = ax.plot(
                                [cut],
                                [c],
                                marker=mk,
                                ms=fs * 0.55,
                                color=r.colour,
                                zorder=2.5,
                                clip_on=False,
                            )
                            art["arrows"].append(arrow)
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
                        s=[(0.55 * row_pt) ** 2],
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
                (bar,) = ax.plot(
                    [lo, hi], [c, c], color=r.colour, lw=2.2, solid_capstyle="butt", zorder=2
                )
                for end in (lo, hi):
                    ax.plot([end, end], [c - 0.28, c + 0.28], color=r.colour, lw=1.0, zorder=2)
                art["bars"].append(bar)

        # words either side of the null, under the tick labels
        words_y = -(7.0 + fs * 1.15) / 72.0
        tr_words = blended_transform_factory(ax.transData, ax.transAxes)
        from matplotlib.transforms import ScaledTranslation

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
                fig.texts.append(
                    _text(fig, null + sign * nudge, 0, txt, tr_words + off, fs_small, ha)
                )
        else:
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
        label = effect_axis_label(measure, units)
        plot_pt = (plot_x1 - plot_x0) * 72.0
        loc = "center" if text_width_pt(label, fs) <= plot_pt else "right"
        ax.set_xlabel(label, fontsize=fs, labelpad=fs * 1.4 * lines_used + 1.0, loc=loc)
        if footer:
            fig.text(
                margin / W,
                0.04 / H,
                footer,
                fontsize=fs_small,
                color=style.MUTED,
                va="bottom",
                ha="left",
            )
        fig.lopside_artists = art
    return fig


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
