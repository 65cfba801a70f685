"""The funnel's geometry: everything a funnel drawing places, computed before any artist.

Pure numbers from a :class:`~lopside.figures.funnel.FunnelInput` and its options: the
vertical axis and its mapping from SE, the vertical and horizontal ranges, the grid the
lines and bands are drawn on, marker areas, and the obstacles that names must avoid. The
layers of :mod:`lopside.figures.funnel_layers` draw (or update in place) from a
:class:`Frame`; a frame computes no statistic (see :mod:`lopside.figures.funnel`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .common import FigureInputError

#: Vertical-axis choices.
FUNNEL_AXES: tuple[str, ...] = ("se", "precision", "variance", "size")
AXIS_TITLES: dict[str, str] = {
    "se": "Standard error",
    "precision": "Precision (1 / standard error)",
    "variance": "Variance (standard error²)",
    "size": "Participants (log spacing)",
}
#: Two-sided p thresholds of the significance bands (common practice; Peters et al. 2008).
DEFAULT_LEVELS: tuple[float, ...] = (0.10, 0.05, 0.01)

Point = tuple[float, float, str]


def _arr(x) -> np.ndarray:
    return np.asarray(x if x is not None else (), dtype=float).reshape(-1)


def z_for_level(p: float) -> float:
    """Two-sided normal critical value: Φ⁻¹(1 − p/2) (1.645, 1.960, 2.576 for .10/.05/.01)."""
    from scipy.special import ndtri

    return float(ndtri(1.0 - p / 2.0))


def contour_edges(
    null: float, se, levels=DEFAULT_LEVELS
) -> dict[float, tuple[np.ndarray, np.ndarray]]:
    """Left and right band edges ``null ∓ z·SE`` for each two-sided p level.

    Parameters
    ----------
    null : float
        No-effect value on the analysis scale.
    se : array-like
        Standard errors at which to evaluate.
    levels : sequence of float

    Returns
    -------
    dict
        level -> (left x, right x).
    """
    se = _arr(se)
    out = {}
    for p in levels:
        z = z_for_level(p)
        out[float(p)] = (null - z * se, null + z * se)
    return out


@dataclass(frozen=True, slots=True)
class _VAxis:
    """Mapping between SE and the vertical axis value."""

    kind: str
    c: float = math.nan  # SE·sqrt(n) constant for the sample-size axis

    def of_se(self, se: np.ndarray) -> np.ndarray:
        se = np.asarray(se, dtype=float)
        if self.kind == "se":
            return se
        if self.kind == "precision":
            with np.errstate(divide="ignore"):
                return 1.0 / se
        if self.kind == "variance":
            return se**2
        with np.errstate(divide="ignore"):
            return (self.c / se) ** 2

    def se_of(self, v: np.ndarray) -> np.ndarray:
        v = np.asarray(v, dtype=float)
        if self.kind == "se":
            return v
        if self.kind == "precision":
            with np.errstate(divide="ignore"):
                return 1.0 / v
        if self.kind == "variance":
            return np.sqrt(v)
        with np.errstate(divide="ignore"):
            return self.c / np.sqrt(v)

    @property
    def inverted(self) -> bool:
        # SE and variance grow downwards (0 at the top); precision and size grow upwards.
        return self.kind in ("se", "variance")


def _vertical_range(vax: _VAxis, values: np.ndarray) -> tuple[float, float]:
    """(top-of-funnel value, bottom-of-funnel value) in axis units."""
    values = values[np.isfinite(values)]
    if vax.kind in ("se", "variance"):
        return 0.0, float(values.max()) * 1.07
    if vax.kind == "precision":
        return float(values.max()) * 1.07, float(values.min()) * 0.8
    return float(values.max()) * 1.25, float(values.min()) * 0.75


def _grid(vax: _VAxis, top: float, bottom: float, num: int = 160) -> np.ndarray:
    if vax.kind == "se":
        return np.array([top, bottom])  # straight lines: two points suffice
    if vax.kind == "size":
        return np.geomspace(bottom, top, num)[::-1]
    return np.linspace(top, bottom, num)


def _marker_areas(weights: np.ndarray, se: np.ndarray, s_max: float) -> np.ndarray:
    """Marker areas proportional to weight, the largest at ``s_max``; floor at 6 % of it."""
    w = weights if weights.size == se.size and np.all(np.isfinite(weights)) else 1.0 / se**2
    w = np.where(w > 0, w, 0.0)
    top = w.max() if w.size and w.max() > 0 else 1.0
    return np.maximum(s_max * w / top, 0.06 * s_max)


def _finite(x) -> bool:
    return x is not None and isinstance(x, (int, float, np.floating)) and math.isfinite(x)


def _finite_point(p) -> bool:
    try:
        return _finite(float(p[0])) and _finite(float(p[1])) and float(p[1]) > 0
    except (TypeError, ValueError, IndexError):
        return False


@dataclass(slots=True)
class Frame:
    """The numbers one funnel drawing places (analysis scale, vertical-axis units)."""

    k: int
    y: np.ndarray
    se: np.ndarray
    labels: tuple[str, ...]
    filled: tuple[Point, ...]
    excluded: tuple[Point, ...]
    vax: _VAxis
    v_obs: np.ndarray
    fill_y: np.ndarray
    v_fill: np.ndarray
    excl_y: np.ndarray
    v_excl: np.ndarray
    top: float
    bottom: float
    se_bottom: float
    grid: np.ndarray
    se_grid: np.ndarray
    levels: tuple[float, ...]
    zs: dict[float, float]
    z_pseudo: float
    xlim: tuple[float, float]
    full_v: np.ndarray
    areas: np.ndarray = field(default_factory=lambda: np.empty(0))
    fill_areas: np.ndarray = field(default_factory=lambda: np.empty(0))
    ex_area: float = 0.0

    def geometry(self) -> dict[str, Any]:
        """The numbers reported in the artists' "geometry" entry."""
        return {
            "z": self.zs,
            "z_pseudo": self.z_pseudo,
            "top": self.top,
            "bottom": self.bottom,
            "se_bottom": self.se_bottom,
            "size_constant": self.vax.c,
            "xlim": self.xlim,
        }


def _checked(inp, opts) -> tuple[np.ndarray, np.ndarray, tuple[str, ...]]:
    if opts.axis not in FUNNEL_AXES:
        raise FigureInputError(
            f"unknown funnel axis {opts.axis!r}; use one of {', '.join(FUNNEL_AXES)}"
        )
    y = _arr(inp.y)
    se = _arr(inp.se)
    if y.size == 0 or y.size != se.size:
        raise FigureInputError("the funnel plot needs at least one study with an effect and SE")
    k = y.size
    labels = (
        tuple(inp.labels) if len(inp.labels) == k else tuple(f"Study {i + 1}" for i in range(k))
    )
    ok = np.isfinite(y) & np.isfinite(se) & (se > 0)
    if not ok.all():
        bad = ", ".join(labels[i] for i in np.flatnonzero(~ok))
        raise FigureInputError(f"these studies have no usable effect or standard error: {bad}")
    return y, se, labels


def _size_constant(inp, opts, se: np.ndarray) -> float:
    """c of SE ≈ c/√n on the sample-size axis (nan on the others)."""
    if opts.axis != "size":
        return math.nan
    k = se.size
    n = _arr(inp.n)
    usable = n.size == k and np.all(np.isfinite(n) & (n > 0))
    if not usable:
        missing = k if n.size != k else int(np.sum(~(np.isfinite(n) & (n > 0))))
        raise FigureInputError(
            f"the sample-size axis needs the number of participants for every study; "
            f"{missing} of {k} have none. Fill in the n column (or arm totals), or "
            f"choose the standard-error axis."
        )
    return float(np.median(se * np.sqrt(n)))


def _x_range(inp, opts, fr_parts: dict) -> tuple[float, float]:
    """Every point, the null, the centre lines, and the outermost band edge and
    pseudo-limit at the wide end of the funnel, with 4 % to spare."""
    se_bottom = fr_parts["se_bottom"]
    xs = [fr_parts["y"], [inp.null], fr_parts["fill_y"], fr_parts["excl_y"]]
    for extra, on in (
        (inp.pooled, True),
        (inp.adjusted, opts.adjusted_line),
        (inp.limit, opts.limit_line),
    ):
        if on and _finite(extra):
            xs.append([extra])
    zs = fr_parts["zs"]
    if opts.contours and fr_parts["levels"]:
        zmax = max(zs.values())
        xs.append([inp.null - zmax * se_bottom, inp.null + zmax * se_bottom])
    z_pseudo = fr_parts["z_pseudo"]
    if opts.pseudo_limits and _finite(inp.pooled):
        xs.append([inp.pooled - z_pseudo * se_bottom, inp.pooled + z_pseudo * se_bottom])
    allx = np.concatenate([np.asarray(v, dtype=float) for v in xs])
    allx = allx[np.isfinite(allx)]
    x_lo, x_hi = float(allx.min()), float(allx.max())
    pad = 0.04 * max(x_hi - x_lo, 1e-6)
    return x_lo - pad, x_hi + pad


def frame_of(inp, opts, marker: float) -> Frame:
    """The :class:`Frame` of one funnel; ``marker`` is the preset's largest marker area.

    Raises
    ------
    FigureInputError
        When there is nothing to plot, or the sample-size axis lacks participant numbers.
    """
    y, se, labels = _checked(inp, opts)
    filled = tuple(p for p in inp.filled if _finite_point(p)) if opts.show_filled else ()
    excluded = tuple(p for p in inp.excluded if _finite_point(p)) if opts.show_excluded else ()
    vax = _VAxis(opts.axis, _size_constant(inp, opts, se))
    v_obs = _arr(inp.n) if opts.axis == "size" else vax.of_se(se)
    fill_y = np.array([p[0] for p in filled], dtype=float)
    excl_y = np.array([p[0] for p in excluded], dtype=float)
    v_fill = vax.of_se(np.array([p[1] for p in filled], dtype=float))
    v_excl = vax.of_se(np.array([p[1] for p in excluded], dtype=float))
    top, bottom = _vertical_range(vax, np.concatenate([v_obs, v_fill, v_excl]))
    se_bottom = float(vax.se_of(np.array([bottom]))[0])
    grid = _grid(vax, top, bottom)
    levels = tuple(sorted({float(p) for p in opts.levels}, reverse=True))
    parts = {
        "y": y,
        "fill_y": fill_y,
        "excl_y": excl_y,
        "se_bottom": se_bottom,
        "levels": levels,
        "zs": {p: z_for_level(p) for p in levels},
        "z_pseudo": z_for_level(1.0 - opts.pseudo_level),
    }
    areas = _marker_areas(_arr(inp.weights), se, marker)
    fill_areas = np.empty(0)
    if filled:
        # an imputed study mirrors an observed one with the same SE: borrow its area
        fse = np.array([p[1] for p in filled])
        fill_areas = areas[np.abs(fse[:, None] - se[None, :]).argmin(axis=1)]
    full_v = np.linspace(top, bottom, 40) if opts.axis != "size" else np.geomspace(bottom, top, 40)
    return Frame(
        k=y.size,
        y=y,
        se=se,
        labels=labels,
        filled=filled,
        excluded=excluded,
        vax=vax,
        v_obs=v_obs,
        fill_y=fill_y,
        v_fill=v_fill,
        excl_y=excl_y,
        v_excl=v_excl,
        top=top,
        bottom=bottom,
        se_bottom=se_bottom,
        grid=grid,
        se_grid=vax.se_of(grid),
        levels=levels,
        zs=parts["zs"],
        z_pseudo=parts["z_pseudo"],
        xlim=_x_range(inp, opts, parts),
        full_v=full_v,
        areas=areas,
        fill_areas=fill_areas,
        ex_area=0.22 * marker,
    )


def line_obstacles(inp, opts, fr: Frame) -> list[np.ndarray]:
    """The drawn lines as rows (x, axis value, radius 1 pt) that names must not cover."""
    out: list[np.ndarray] = []

    def add(xv, yv):
        xv = np.broadcast_to(np.asarray(xv, dtype=float), np.shape(yv))
        yy = np.asarray(yv, dtype=float)
        if yy.size == 2:  # straight line: sample it
            tt = np.linspace(0, 1, 40)
            xv = xv[0] + tt * (xv[1] - xv[0])
            yy = yy[0] + tt * (yy[1] - yy[0])
        out.append(np.column_stack([xv, yy, np.full(yy.size, 1.0)]))

    add(np.full(fr.full_v.size, inp.null), fr.full_v)
    if _finite(inp.pooled):
        add(np.full(fr.full_v.size, inp.pooled), fr.full_v)
        if opts.pseudo_limits:
            half = fr.z_pseudo * fr.se_grid
            add(inp.pooled - half, fr.grid)
            add(inp.pooled + half, fr.grid)
    if opts.egger_line and inp.egger is not None and all(_finite(v) for v in inp.egger):
        intercept, slope = inp.egger
        add(slope + intercept * fr.se_grid, fr.grid)
    for value, on in ((inp.adjusted, opts.adjusted_line), (inp.limit, opts.limit_line)):
        if on and _finite(value):
            add(np.full(fr.full_v.size, value), fr.full_v)
    return out


def point_obstacles(fr: Frame) -> list[np.ndarray]:
    """The markers as rows (x, axis value, radius in points)."""
    out = [np.column_stack([fr.y, fr.v_obs, 0.5 * np.sqrt(fr.areas)])]
    if fr.filled:
        out.append(np.column_stack([fr.fill_y, fr.v_fill, 0.5 * np.sqrt(fr.fill_areas)]))
    if fr.excluded:
        r = np.full(fr.excl_y.size, 0.5 * math.sqrt(fr.ex_area))
        out.append(np.column_stack([fr.excl_y, fr.v_excl, r]))
    return out
