"""Mark the rows to check (stats.diagnostics) on a funnel that is already drawn.

One overlay call after the funnel builder, so the funnel's own drawing code does not
change: a ring in ink around each flagged study and "check row N" beside it (palette:
resources/palette.md, "Rows to check"). Pure matplotlib on a given Axes; never pyplot,
never Qt.
"""

from __future__ import annotations

from typing import Any

from . import style

#: the ring: marker area in points² (larger than the largest study point), edge width
RING_AREA = {"column": 150.0, "page": 260.0, "slide": 360.0}
RING_WIDTH = 1.4
LABEL = "check row {row}"


def flagged_points(result, axis: str = "se") -> list[tuple[float, float, int]]:
    """(effect, vertical position, table row) of each flagged study in the analysis.

    ``axis`` is the funnel's vertical axis ("se", "precision", "variance"; the sample-size
    axis uses the study's n).
    """
    import math

    flags = getattr(result, "row_flags", None)
    flagged = getattr(flags, "flagged", ()) or ()
    data = result.data
    where = {r: i for i, r in enumerate(data.rows)}
    out = []
    for f in flagged:
        i = where.get(f.row)
        if i is None:
            continue
        y, se = float(data.y[i]), float(data.se[i])
        if axis == "precision":
            v = 1.0 / se
        elif axis == "variance":
            v = se * se
        elif axis == "size":
            v = float(data.n[i]) if data.n.size == data.k else math.nan
        else:
            v = se
        if math.isfinite(y) and math.isfinite(v):
            out.append((y, v, f.row))
    return out


def mark_flagged(ax, points, *, size: str = "page") -> list[Any]:
    """Ring each (x, v, row) point and write "check row N" beside it; return the artists."""
    if not points:
        return []
    preset = style.size_preset(size)
    xs = [p[0] for p in points]
    vs = [p[1] for p in points]
    ring = ax.scatter(
        xs,
        vs,
        s=RING_AREA.get(size, RING_AREA["page"]),
        facecolors="none",
        edgecolors=style.INK,
        linewidths=RING_WIDTH,
        zorder=6,
        clip_on=False,
    )
    out: list[Any] = [ring]
    lo, hi = sorted(ax.get_xlim())
    for x, v, row in points:
        right_half = x > (lo + hi) / 2.0  # write towards the middle, not off the plot
        out.append(
            ax.annotate(
                LABEL.format(row=row + 1),
                (x, v),
                xytext=(-9 if right_half else 9, -9),
                textcoords="offset points",
                ha="right" if right_half else "left",
                fontsize=preset.font * 0.85,
                color=style.INK,
                zorder=7,
                annotation_clip=False,
            )
        )
    return out
