"""Names on the funnel: the bands' names inside their bands, and chosen study names.

Both are placed against the axes as laid out when they are placed (display pixels from
the axes transform), clear of the points and lines given as obstacles; see
:func:`band_label_spots` and :func:`place_labels`.
"""

from __future__ import annotations

import math

import numpy as np

from . import style
from .common import text_width_pt

#: band names are written horizontally at this size at least (points), to be read at a
#: glance in the window and on a page; where a band has no room for its name at that
#: size, the names go to the key. The small "column" size for print keeps its 7-pt type.
BAND_LABEL_MIN_PT = 8.0


def band_label_pt(preset) -> float:
    return max(BAND_LABEL_MIN_PT, preset.font * 0.9) if preset.font >= 8 else preset.font * 0.9


def band_label_spots(ax, null, preset, zlist, names, grid, se_grid, xlim, obstacles):
    """Where each band's name goes, horizontally inside the band, clear of points.

    The name's box must fit between the band's edges along its whole height (the edges
    slant, so the narrower end decides). Candidate rows run from near the wide end of the
    funnel upwards, on the emptier side first. Returns (x, axis value, name) for each band,
    or [] when some band has no spot where its name fits (the caller then lists the bands
    in the key).
    """
    fs = band_label_pt(preset)
    x_lo, x_hi = xlim
    trans = ax.transData
    px_per_pt = ax.figure.dpi / 72.0
    h_px = fs * 1.25 * px_per_pt
    pad = 2.0 * px_per_pt
    frame = ax.get_window_extent()
    fx0, fy0, fx1, fy1 = frame.x0, frame.y0, frame.x1, frame.y1
    obs = trans.transform(obstacles[:, :2]) if len(obstacles) else np.empty((0, 2))
    obs_r = obstacles[:, 2] * px_per_pt if len(obstacles) else np.empty(0)
    right = np.sum(obstacles[:, 0] > null) if len(obstacles) else 0
    left = np.sum(obstacles[:, 0] < null) if len(obstacles) else 0
    sides = (1.0, -1.0) if right <= left else (-1.0, 1.0)
    # each edge x = null + side z SE as a curve in display pixels (y increasing)
    fine = np.linspace(0, 1, 81)
    gy = np.interp(fine, np.linspace(0, 1, len(grid)), grid)
    gse = np.interp(fine, np.linspace(0, 1, len(grid)), se_grid)

    def edge_x(z: float, side: float, ys: np.ndarray) -> np.ndarray:
        if z == math.inf:
            lim = trans.transform((x_hi if side > 0 else x_lo, gy[0]))[0]
            return np.full(ys.shape, lim)
        pts = trans.transform(np.column_stack([null + side * z * gse, gy]))
        order = np.argsort(pts[:, 1])
        return np.interp(ys, pts[order, 1], pts[order, 0])

    bounds = [0.0, *zlist, math.inf]
    disp_y = trans.transform(np.column_stack([np.full(gy.size, null), gy]))[:, 1]
    # candidate rows from the wide end of the funnel (largest SE) towards the narrow end
    y_rows = disp_y[np.argsort(-gse, kind="stable")]
    specs = []
    for i, name in enumerate(names):
        length_px = text_width_pt(name, fs) * px_per_pt
        found = None
        for side in sides:
            for t in (0.06, 0.12, 0.18, 0.26, 0.34, 0.42, 0.5, 0.58):
                cy = float(np.interp(t, np.linspace(0, 1, y_rows.size), y_rows))
                ys = np.array([cy - h_px / 2, cy + h_px / 2])
                if ys[0] < fy0 + 2 or ys[1] > fy1 - 2:
                    continue
                inner = edge_x(bounds[i], side, ys)
                outer = edge_x(bounds[i + 1], side, ys)
                if side > 0:
                    lo, hi = float(inner.max()), float(outer.min())
                else:
                    lo, hi = float(outer.max()), float(inner.min())
                lo, hi = max(lo, fx0 + 2), min(hi, fx1 - 2)
                if hi - lo < length_px + 2 * pad:
                    continue
                # slide along the row, from the middle of the free width outwards
                a, b = lo + pad + length_px / 2, hi - pad - length_px / 2
                if i == len(zlist):  # the outer band is open: stay near its inner edge
                    b = min(b, a + 2 * length_px)
                xs = np.linspace(a, b, 9)
                for cx in xs[np.argsort(np.abs(xs - 0.5 * (a + b)), kind="stable")]:
                    box = (cx - length_px / 2, ys[0], cx + length_px / 2, ys[1])
                    if obs.size:
                        dx = np.maximum(np.maximum(box[0] - obs[:, 0], obs[:, 0] - box[2]), 0)
                        dy = np.maximum(np.maximum(box[1] - obs[:, 1], obs[:, 1] - box[3]), 0)
                        if np.any(np.hypot(dx, dy) < obs_r + 1.5 * px_per_pt):
                            continue
                    found = (*trans.inverted().transform((cx, cy)), name)
                    break
                if found:
                    break
            if found:
                break
        if found is None:
            return []
        specs.append(found)
    return specs


def write_band_labels(ax, specs, preset) -> list:
    """The Text artists of the band names at the spots :func:`band_label_spots` chose."""
    fs = band_label_pt(preset)
    texts = []
    for xm, yv, name in specs:
        texts.append(
            ax.text(
                xm,
                yv,
                name,
                fontsize=fs,
                color=style.BAND_TEXT,
                ha="center",
                va="center",
                rotation=0,
                zorder=0.8,
            )
        )
    return texts


def wanted_labels(spec, labels: tuple[str, ...]) -> set[str]:
    if not spec:
        return set()
    if isinstance(spec, str):
        if spec == "all":
            return set(labels)
        spec = [s.strip() for s in spec.split(",")]
    return {s for s in spec if s}


def place_labels(ax, pts, obstacles, radii, preset) -> list:
    """Greedy placement: try offsets around each point until the text box hits nothing.

    Boxes are in display pixels from the axes transform as laid out now; offsets are in
    points, so a later relayout moves each name with its point. Each placed Text gets a
    ``lopside_box`` attribute (its box in data coordinates) for later obstacle checks.
    """
    fs = preset.font * 0.8
    trans = ax.transData
    ppt = ax.figure.dpi / 72.0  # pixels per point
    occ = []  # occupied boxes (x0, y0, x1, y1) in pixels
    pix = trans.transform(obstacles) if len(obstacles) else np.empty((0, 2))
    for (px, py), r in zip(pix, radii, strict=False):
        rr = (0.5 * r + 1.0) * ppt
        occ.append((px - rr, py - rr, px + rr, py + rr))
    fr = ax.get_window_extent()
    frame = (fr.x0, fr.y0, fr.x1, fr.y1)
    texts = []
    order = sorted(range(len(pts)), key=lambda i: -pts[i][3])
    # directions: the 8 compass points first, then the 8 between them
    dirs = [(1, 0), (-1, 0), (1, 1), (1, -1), (-1, 1), (-1, -1), (0, 1), (0, -1)]
    dirs += [(1, 0.5), (1, -0.5), (-1, 0.5), (-1, -0.5), (0.5, 1), (-0.5, 1), (0.5, -1), (-0.5, -1)]
    for i in order:
        x, v, lab, r = pts[i]
        px, py = trans.transform((x, v))
        w = text_width_pt(lab, fs) * ppt
        h = fs * 1.2 * ppt
        gap_pt = 0.6 * r + 2.5  # squares and triangles reach past the circle radius
        best = None
        least = None  # (overlap area, candidate) when nothing is free
        for ring in (1.0, 1.8, 2.8, 4.0, 5.5, 7.5, 10.0, 13.0, 17.0, 22.0, 28.0):
            for dx, dy in dirs:
                ox, oy = dx * gap_pt * ring, dy * gap_pt * ring
                if ring > 1.0:  # far from the point: at least a name's height away
                    ox, oy = ox + math.copysign(2.0, dx) * (dx != 0), oy
                cx, cy = px + ox * ppt, py + oy * ppt
                x0 = cx if dx > 0 else (cx - w if dx < 0 else cx - w / 2)
                y0 = cy if dy > 0 else (cy - h if dy < 0 else cy - h / 2)
                box = (x0, y0, x0 + w, y0 + h)
                if box[0] < frame[0] or box[2] > frame[2] or box[1] < frame[1] or box[3] > frame[3]:
                    continue
                cand = (ox, oy, dx, dy, box, ring)
                hit = sum(_overlap_area(box, o) for o in occ)
                if hit == 0:
                    best = cand
                    break
                if least is None or hit < least[0]:
                    least = (hit, cand)
            if best:
                break
        if best is None:  # nowhere free: where it covers least, with its leader line
            best = (
                least[1]
                if least is not None
                else (
                    gap_pt,
                    0.0,
                    1,
                    0,
                    (px + gap_pt * ppt, py - h / 2, px + gap_pt * ppt + w, py + h / 2),
                    1.0,
                )
            )
        ox, oy, dx, dy, box, ring = best
        occ.append(box)
        # a name set away from its point is tied to it by a thin leader line
        leader = (
            dict(arrowstyle="-", color=style.MUTED, lw=0.5, shrinkA=0.0, shrinkB=0.5 * r + 1.0)
            if ring > 1.8
            else None
        )
        t = ax.annotate(
            lab,
            (x, v),
            xytext=(ox, oy),
            textcoords="offset points",
            ha="left" if dx > 0 else ("right" if dx < 0 else "center"),
            va="bottom" if dy > 0 else ("top" if dy < 0 else "center"),
            fontsize=fs,
            color=style.INK,
            zorder=4,
            arrowprops=leader,
        )
        inv = trans.inverted()
        t.lopside_box = inv.transform([(box[0], box[1]), (box[2], box[3])])
        texts.append(t)
    return texts


def _overlap_area(a, b) -> float:
    w = min(a[2], b[2]) - max(a[0], b[0])
    h = min(a[3], b[3]) - max(a[1], b[1])
    return w * h if w > 0 and h > 0 else 0.0


def study_name_points(fr, wanted: set[str], preset) -> list[tuple[float, float, str, float]]:
    """(x, axis value, name, marker size in points) of each study to be named."""
    pts = [
        (fr.y[i], fr.v_obs[i], fr.labels[i], math.sqrt(fr.areas[i]))
        for i in range(fr.k)
        if fr.labels[i] in wanted
    ]
    pts += [
        (p[0], v, p[2], math.sqrt(a))
        for p, v, a in zip(fr.filled, fr.v_fill, fr.fill_areas, strict=True)
        if p[2] in wanted
    ]
    pts += [
        (p[0], v, p[2], math.sqrt(0.22 * preset.marker))
        for p, v in zip(fr.excluded, fr.v_excl, strict=True)
        if p[2] in wanted
    ]
    return pts


def name_study_points(ax, fr, wanted: set[str], obstacles: list[np.ndarray], preset) -> list:
    """Place the chosen study names; each name's box is added to ``obstacles`` (for the
    band names, which then avoid them). Returns the Annotation artists."""
    pts = study_name_points(fr, wanted, preset)
    obs = np.concatenate(obstacles) if obstacles else np.empty((0, 3))
    pointish = obs[obs[:, 2] > 1.0] if len(obs) else obs
    texts = place_labels(ax, pts, pointish[:, :2], 2 * pointish[:, 2], preset)
    for t in texts:
        # a study name is an obstacle for the band names: sample its box
        (bx0, by0), (bx1, by1) = t.lopside_box
        gx, gy = np.meshgrid(np.linspace(bx0, bx1, 6), np.linspace(by0, by1, 3))
        obstacles.append(np.column_stack([gx.ravel(), gy.ravel(), np.full(gx.size, 1.0)]))
    return texts
