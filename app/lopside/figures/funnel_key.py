"""The funnel's words around the plot: the caption above it and the key.

The key lists points, then lines, then bands, each group kept together in the key's
columns; :func:`legend_plan` decides the columns from the words alone, so a drawing
updated in place (:func:`lopside.figures.funnel.update_funnel`) can tell whether its key
keeps its shape and only its words change.
"""

from __future__ import annotations

import math

from . import style
from .common import measure_label, text_width_pt
from .funnel_labels import BAND_LABEL_MIN_PT


def caption_text(ax, inp, opts, k: int, n_filled: int, n_excl: int, preset) -> str:
    """One line (two when the plot is narrow): measure, model and number of studies."""
    parts = [measure_label(inp.measure)]
    if inp.model_label:
        parts.append(inp.model_label)
    count = f"k = {k}"
    extras = []
    if n_filled:
        extras.append(f"{n_filled} imputed")
    if n_excl:
        extras.append(f"{n_excl} excluded")
    if extras:
        count += " (" + ", ".join(extras) + ")"
    parts.append(count)
    if opts.axis == "size":
        parts.append("lines drawn with SE \u2248 c/\u221an")
    text = " \u00b7 ".join(parts)
    width_pt = ax.get_position().width * ax.figure.get_size_inches()[0] * 72.0
    if text_width_pt(text, preset.font * 0.85) > width_pt and len(parts) > 2:
        text = " \u00b7 ".join(parts[:2]) + "\n" + " \u00b7 ".join(parts[2:])
    return text


def draw_caption(ax, text: str, preset):
    return ax.set_title(text, loc="left", fontsize=preset.font * 0.85, color=style.MUTED, pad=4)


def key_font_pt(preset) -> float:
    # the key names the bands when they do not fit on the plot: at least 8 pt, like them
    return max(BAND_LABEL_MIN_PT, preset.font * 0.8) if preset.font >= 8 else preset.font * 0.8


def legend_plan(opts, groups: list[list[str]], preset, fig_width_in: float):
    """(ncol, slots) of the key below the plot: ``slots`` lists (group, index) or None for
    a blank, in the order the legend fills them; None when the key is not below."""
    if opts.legend != "below":
        return None
    fs = key_font_pt(preset)
    names = [n for g in groups for n in g]
    width_pt = fig_width_in * 72.0 * 0.94
    widest = max(text_width_pt(n, fs) for n in names) + 3.6 * fs
    ncol = max(1, min(3, int(width_pt // widest)))
    # pad each group to whole columns so a group never starts mid-column
    groups = [list(enumerate(g)) for g in groups]
    live = [(j, g) for j, g in enumerate(groups) if g]
    if len(live) > ncol:
        return ncol, [(j, i) for j, g in live for i, _ in g]
    rows = max(len(g) for _, g in live)
    spare = ncol - len(live)
    # long groups may take a second column when there are spare columns
    while spare > 0 and rows > 1:
        longest = max((g for _, g in live), key=len)
        if len(longest) <= rows // 2 + 1:
            break
        rows = max(math.ceil(len(longest) / 2), max(len(g) for _, g in live if g is not longest))
        spare -= 1
    slots: list = []
    for j, g in live:
        for c in range(0, len(g), rows):
            chunk = [(j, i) for i, _ in g[c : c + rows]]
            slots += chunk + [None] * (rows - len(chunk))
    return len(slots) // rows, slots


def draw_legend(ax, opts, points, lines, bands, preset):
    """The key: points, then lines, then bands (each group kept together in the columns)."""
    if opts.legend == "none":
        return None
    items = points + lines + bands
    if not items:
        return None
    fs = key_font_pt(preset)
    if opts.legend == "inside":
        leg = ax.legend(
            [h for h, _ in items],
            [n for _, n in items],
            loc="best",
            fontsize=fs,
            frameon=True,
            framealpha=0.9,
            edgecolor=style.RULE,
        )
    else:
        groups = [points, lines, bands]
        names = [[n for _, n in g] for g in groups]
        ncol, slots = legend_plan(opts, names, preset, ax.figure.get_size_inches()[0])
        handles, labels = _slotted(groups, slots)
        kw = dict(ncols=ncol, fontsize=fs, frameon=False, columnspacing=1.4, handletextpad=0.5)
        engine = ax.figure.get_layout_engine()
        if engine is not None and type(engine).__name__ == "ConstrainedLayoutEngine":
            # the layout engine makes room for a figure key below the axes
            leg = ax.figure.legend(handles, labels, loc="outside lower center", **kw)
        else:
            leg = ax.legend(
                handles,
                labels,
                loc="upper center",
                bbox_to_anchor=(0.5, -0.18),
                borderaxespad=0.0,
                **kw,
            )
        leg.lopside_plan = (ncol, slots)
    # key markers at one size: marker area in the key says nothing about weight
    for h in leg.legend_handles:
        if hasattr(h, "set_sizes"):
            h.set_sizes([0.35 * preset.marker])
    return leg


def _slotted(groups, slots):
    from matplotlib.patches import Rectangle

    handles, labels = [], []
    for s in slots:
        if s is None:
            handles.append(Rectangle((0, 0), 0, 0, fill=False, edgecolor="none", visible=False))
            labels.append("")
        else:
            h, n = groups[s[0]][s[1]]
            handles.append(h)
            labels.append(n)
    return handles, labels


def update_legend(leg, opts, names: list[list[str]], preset) -> bool:
    """Put new words into the key in place; False when the key would change its shape."""
    if leg is None:
        return True
    flat = [n for g in names for n in g]
    texts = leg.get_texts()
    if opts.legend == "inside":
        if len(texts) != len(flat):
            return False
        labels = flat
    else:
        plan = legend_plan(opts, names, preset, leg.figure.get_size_inches()[0])
        if plan != getattr(leg, "lopside_plan", None):
            return False
        labels = ["" if s is None else names[s[0]][s[1]] for s in plan[1]]
    for t, n in zip(texts, labels, strict=True):
        if t.get_text() != n:
            t.set_text(n)
    return True
