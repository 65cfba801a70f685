"""The contour-enhanced funnel plot (pure matplotlib, no pyplot, no Qt).

Design invariants
-----------------
* The builder draws exactly what its :class:`FunnelInput` holds; it computes no
  statistic. The only arithmetic is geometry: band edges at ``null ± z·SE`` with
  ``z = Φ⁻¹(1 − p/2)`` (Peters et al. 2008, J Clin Epidemiol; methods.md section 6),
  pseudo-confidence limits at ``pooled ± z·SE`` (Sterne & Egger 2001), and the mapping of
  those lines onto the chosen vertical axis.
* Effects are on the analysis scale (natural log for ratio measures); a ratio axis is
  labelled in natural units.
* Vertical axes: standard error (0 at the top), precision 1/SE, variance SE² (0 at the
  top), or sample size. On the sample-size axis a line of constant z has no exact
  position, because SE is not a function of n alone; the lines are drawn with
  SE ≈ c/√n, c being the median of SE·√n over the plotted studies, and the caption says so.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from . import style
from .common import (
    FigureInputError,
    effect_axis_label,
    format_effect,
    measure_label,
    set_effect_axis,
    text_width_pt,
)

if TYPE_CHECKING:  # pragma: no cover
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

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


@dataclass(frozen=True, slots=True, eq=False)
class FunnelInput:
    """Everything a funnel plot shows, as plain values on the analysis scale.

    Attributes
    ----------
    measure : str
        "OR", "RR", "HR", "RD", "MD" or "SMD".
    y, se : array-like
        Effects (log scale for ratios) and standard errors of the included studies.
    labels : tuple of str
        Study labels, same order.
    weights : array-like
        Weights used for marker area (any positive scale, e.g. percent). Empty: 1/SE².
    groups : tuple of str
        Group of each study for colouring (subgroup or risk-of-bias level); may be empty.
    group_title : str
        What the groups are ("Subgroup", "Risk of bias"); shown above the key entries.
    group_kind : {"subgroup", "risk_of_bias"}
        Chooses the colour set.
    n : array-like
        Participants per study (nan when unknown); needed only for the sample-size axis.
    excluded : tuple of (y, se, label)
        Studies the user excluded that still have an effect and SE.
    filled : tuple of (y, se, label)
        Imputed (trim-and-fill) pseudo-studies.
    pooled : float or None
        The pooled estimate the funnel is centred on.
    model_label : str
        Words for the pooled model ("fixed effect", "random effects (REML)").
    null : float
        No-effect value on the analysis scale (0).
    egger : (intercept, slope) or None
        Egger regression y/SE = intercept + slope/SE; on the SE axis the line is
        x = slope + intercept·SE.
    adjusted : float or None
        Trim-and-fill adjusted estimate.
    limit : float or None
        Limit meta-analysis estimate.
    """

    measure: str
    y: Any
    se: Any
    labels: tuple[str, ...] = ()
    weights: Any = ()
    groups: tuple[str, ...] = ()
    group_title: str = ""
    group_kind: str = "subgroup"
    n: Any = ()
    excluded: tuple[Point, ...] = ()
    filled: tuple[Point, ...] = ()
    pooled: float | None = None
    model_label: str = ""
    null: float = 0.0
    egger: tuple[float, float] | None = None
    adjusted: float | None = None
    limit: float | None = None
    #: the outcome's units, for the axis title of mean differences ("" = none given)
    units: str = ""

    @property
    def k(self) -> int:
        return int(_arr(self.y).size)


@dataclass(frozen=True, slots=True)
class FunnelOptions:
    """How to draw the funnel.

    Attributes
    ----------
    axis : {"se", "precision", "variance", "size"}
        Vertical axis.
    model : {"fixed", "random"} or None
        Which pooled estimate the adaptor centres on; None follows the analysis settings'
        ``funnel_model`` (the builder itself draws ``inp.pooled``).
    contours : bool
        Draw significance bands centred on the null.
    levels : tuple of float
        Two-sided p thresholds of the bands.
    band_labels : {"direct", "key"}
        Label bands on the plot (falls back to the key when a band is too narrow) or in
        the key.
    pseudo_limits : bool
        Draw pseudo-confidence limits about the pooled estimate.
    pseudo_level : float
        Their coverage (0.95 gives ±1.96·SE).
    colour_by : {"none", "subgroup", "risk_of_bias"}
    egger_line, adjusted_line, limit_line : bool
        Overlays, drawn only when the input has the value.
    show_filled, show_excluded : bool
    labels : "all" or tuple of str
        Studies to name on the plot (exact labels); () for none.
    legend : {"below", "inside", "none"}
    caption : bool
        One line above the plot naming measure, model and k.
    """

    axis: str = "se"
    model: str | None = None
    contours: bool = True
    levels: tuple[float, ...] = DEFAULT_LEVELS
    band_labels: str = "direct"
    pseudo_limits: bool = True
    pseudo_level: float = 0.95
    colour_by: str = "none"
    egger_line: bool = False
    adjusted_line: bool = False
    limit_line: bool = False
    show_filled: bool = True
    show_excluded: bool = True
    labels: Any = ()
    legend: str = "below"
    caption: bool = True


# --------------------------------------------------------------------------------------
# Geometry (pure functions, tested directly)


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


# --------------------------------------------------------------------------------------
# Drawing


def draw_funnel(
    ax: Axes, inp: FunnelInput, opts: FunnelOptions | None = None, *, size: str = "column"
) -> dict[str, Any]:
    """Draw a funnel plot onto ``ax``.

    Parameters
    ----------
    ax : matplotlib.axes.Axes
        Target axes (its figure may be embedded in a window or saved to a file).
    inp : FunnelInput
    opts : FunnelOptions, optional
    size : str
        Size preset that sets fonts and marker areas ("column", "page", "slide").

    Returns
    -------
    dict
        The artists made: "null", "pooled", "pseudo_limits" (left, right), "contour_edges"
        {level: (left, right)}, "bands" [(label, [PolyCollection...])], "band_labels",
        "studies" [PathCollection per group], "filled", "excluded", "egger", "adjusted",
        "limit", "labels", "legend", "caption"; absent parts map to None or empty.
        "geometry" holds the numbers used (z per level, vertical range, c for the size axis).

    Raises
    ------
    FigureInputError
        When there is nothing to plot, or the sample-size axis is asked for without
        participant numbers.
    """
    opts = opts or FunnelOptions()
    preset = style.size_preset(size)
    with style.style_context(preset.font):
        return _draw(ax, inp, opts, preset)


def _draw(ax: Axes, inp: FunnelInput, opts: FunnelOptions, preset: style.SizePreset) -> dict:
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
    filled = tuple(p for p in inp.filled if _finite_point(p)) if opts.show_filled else ()
    excluded = tuple(p for p in inp.excluded if _finite_point(p)) if opts.show_excluded else ()

    # --- vertical axis
    c = math.nan
    n = _arr(inp.n)
    if opts.axis == "size":
        usable = n.size == k and np.all(np.isfinite(n) & (n > 0))
        if not usable:
            missing = k if n.size != k else int(np.sum(~(np.isfinite(n) & (n > 0))))
            raise FigureInputError(
                f"the sample-size axis needs the number of participants for every study; "
                f"{missing} of {k} have none. Fill in the n column (or arm totals), or "
                f"choose the standard-error axis."
            )
        c = float(np.median(se * np.sqrt(n)))
    vax = _VAxis(opts.axis, c)
    v_obs = n if opts.axis == "size" else vax.of_se(se)
    fill_y = np.array([p[0] for p in filled], dtype=float)
    excl_y = np.array([p[0] for p in excluded], dtype=float)
    v_fill = vax.of_se(np.array([p[1] for p in filled], dtype=float))
    v_excl = vax.of_se(np.array([p[1] for p in excluded], dtype=float))
    top, bottom = _vertical_range(vax, np.concatenate([v_obs, v_fill, v_excl]))
    se_bottom = float(vax.se_of(np.array([bottom]))[0])
    grid = _grid(vax, top, bottom)
    se_grid = vax.se_of(grid)

    # --- horizontal range: every point, the null, the centre lines, and the outermost
    # band edge and pseudo-limit at the wide end of the funnel
    levels = tuple(sorted({float(p) for p in opts.levels}, reverse=True))
    zs = {p: z_for_level(p) for p in levels}
    z_pseudo = z_for_level(1.0 - opts.pseudo_level)
    xs = [y, [inp.null], fill_y, excl_y]
    for extra, on in (
        (inp.pooled, True),
        (inp.adjusted, opts.adjusted_line),
        (inp.limit, opts.limit_line),
    ):
        if on and _finite(extra):
            xs.append([extra])
    if opts.contours and levels:
        zmax = max(zs.values())
        xs.append([inp.null - zmax * se_bottom, inp.null + zmax * se_bottom])
    if opts.pseudo_limits and _finite(inp.pooled):
        xs.append([inp.pooled - z_pseudo * se_bottom, inp.pooled + z_pseudo * se_bottom])
    allx = np.concatenate([np.asarray(v, dtype=float) for v in xs])
    allx = allx[np.isfinite(allx)]
    x_lo, x_hi = float(allx.min()), float(allx.max())
    pad = 0.04 * max(x_hi - x_lo, 1e-6)
    x_lo, x_hi = x_lo - pad, x_hi + pad

    if opts.axis == "size":
        ax.set_yscale("log")
    set_effect_axis(ax, inp.measure, x_lo, x_hi, "x")
    # matplotlib draws ylim[0] at the bottom: SE/variance get (max, 0), so 0 sits at the
    # top; precision/size get (min, max).
    ax.set_ylim(bottom, top)
    ax.set_autoscale_on(False)
    ax.set_xlabel(effect_axis_label(inp.measure, inp.units))
    ax.set_ylabel(AXIS_TITLES[opts.axis])
    if opts.axis == "size":
        from matplotlib.ticker import LogLocator, NullFormatter, ScalarFormatter

        ax.yaxis.set_major_locator(LogLocator(base=10, subs=(1.0, 2.0, 5.0)))
        fmt = ScalarFormatter()
        fmt.set_scientific(False)
        ax.yaxis.set_major_formatter(fmt)
        ax.yaxis.set_minor_formatter(NullFormatter())
    ax.tick_params(labelsize=preset.font * 0.9, colors=style.INK)
    ax.set_facecolor(style.PAPER)

    art: dict[str, Any] = {
        "geometry": {
            "z": zs,
            "z_pseudo": z_pseudo,
            "top": top,
            "bottom": bottom,
            "se_bottom": se_bottom,
            "size_constant": c,
            "xlim": (x_lo, x_hi),
        },
        "bands": [],
        "band_labels": [],
        "contour_edges": {},
        "labels": [],
    }
    # key entries in groups, so related entries stay together in the key's columns
    key_points: list[tuple[Any, str]] = []
    key_lines: list[tuple[Any, str]] = []
    # things band labels must not cover: (x, axis value, radius in points)
    obstacles: list[np.ndarray] = []

    def line_obstacle(xv, yv):
        xv = np.broadcast_to(np.asarray(xv, dtype=float), np.shape(yv))
        yy = np.asarray(yv, dtype=float)
        if yy.size == 2:  # straight line: sample it
            tt = np.linspace(0, 1, 40)
            xv = xv[0] + tt * (xv[1] - xv[0])
            yy = yy[0] + tt * (yy[1] - yy[0])
        obstacles.append(np.column_stack([xv, yy, np.full(yy.size, 1.0)]))

    # --- significance bands (filled first: everything else sits on them)
    if opts.contours and levels:
        _draw_bands(ax, inp, levels, zs, grid, se_grid, (x_lo, x_hi), art)

    # --- reference lines
    full_v = np.linspace(top, bottom, 40) if opts.axis != "size" else np.geomspace(bottom, top, 40)
    art["null"] = ax.axvline(
        inp.null,
        color=style.NULL_LINE,
        lw=style.LINE_WIDTH["null"],
        ls=style.LINE_STYLE["null"],
        zorder=2,
    )
    line_obstacle(np.full(full_v.size, inp.null), full_v)
    key_lines.append((art["null"], "no effect"))
    art["pooled"] = None
    art["pseudo_limits"] = None
    if _finite(inp.pooled):
        art["pooled"] = ax.axvline(
            inp.pooled, color=style.INK, lw=style.LINE_WIDTH["pooled"], zorder=2.2
        )
        line_obstacle(np.full(full_v.size, inp.pooled), full_v)
        name = f"pooled ({inp.model_label})" if inp.model_label else "pooled estimate"
        key_lines.append((art["pooled"], f"{name}: {format_effect(inp.pooled, inp.measure)}"))
        if opts.pseudo_limits:
            half = z_pseudo * se_grid
            kw = dict(
                color=style.INK,
                lw=style.LINE_WIDTH["pseudo"],
                ls=style.LINE_STYLE["pseudo"],
                zorder=2.1,
            )
            (left,) = ax.plot(inp.pooled - half, grid, **kw)
            (right,) = ax.plot(inp.pooled + half, grid, **kw)
            line_obstacle(inp.pooled - half, grid)
            line_obstacle(inp.pooled + half, grid)
            art["pseudo_limits"] = (left, right)
            key_lines.append((left, f"pseudo {opts.pseudo_level:.0%} limits"))

    # --- overlays
    art["egger"] = art["adjusted"] = art["limit"] = None
    if opts.egger_line and inp.egger is not None and all(_finite(v) for v in inp.egger):
        intercept, slope = inp.egger
        ex = slope + intercept * se_grid
        (art["egger"],) = ax.plot(
            ex,
            grid,
            color=style.EGGER,
            lw=style.LINE_WIDTH["overlay"],
            ls=style.LINE_STYLE["egger"],
            zorder=2.4,
        )
        line_obstacle(ex, grid)
        key_lines.append((art["egger"], "Egger regression line"))
    for key, value, on, colour, words in (
        ("adjusted", inp.adjusted, opts.adjusted_line, style.TRIMFILL, "after trim and fill"),
        ("limit", inp.limit, opts.limit_line, style.LIMIT, "limit meta-analysis"),
    ):
        if on and _finite(value):
            art[key] = ax.axvline(
                value,
                color=colour,
                lw=style.LINE_WIDTH["overlay"],
                ls=style.LINE_STYLE[key],
                zorder=2.3,
            )
            line_obstacle(np.full(full_v.size, value), full_v)
            key_lines.append((art[key], f"{words}: {format_effect(value, inp.measure)}"))

    # --- studies
    weights = _arr(inp.weights)
    areas = _marker_areas(weights, se, preset.marker)
    art["studies"] = []
    colour = opts.colour_by != "none" and len(inp.groups) == k and any(inp.groups)
    if colour:
        kind = "risk_of_bias" if opts.colour_by == "risk_of_bias" else inp.group_kind
        styles = style.group_styles(tuple(inp.groups), kind)
        if inp.group_title:
            # a key heading: an invisible handle with the title as its text
            (head,) = ax.plot([], [], ls="none")
            key_points.append((head, inp.group_title + ":"))
        for g, (col, mk) in styles.items():
            idx = np.array([i for i in range(k) if inp.groups[i] == g])
            sc = ax.scatter(
                y[idx],
                v_obs[idx],
                s=areas[idx],
                c=col,
                marker=mk,
                edgecolors=style.INK,
                linewidths=0.45,
                alpha=style.STUDY_ALPHA,
                zorder=3,
            )
            art["studies"].append(sc)
            if kind == "risk_of_bias":
                name = style.RISK_OF_BIAS_NAMES.get(g.strip().lower(), g)
            else:
                name = g or "no subgroup"
            key_points.append((sc, name))
    else:
        sc = ax.scatter(
            y,
            v_obs,
            s=areas,
            c=style.INK,
            marker=style.STUDY_MARKER,
            edgecolors=style.STUDY_EDGE,
            linewidths=0.5,
            alpha=style.STUDY_ALPHA,
            zorder=3,
        )
        art["studies"].append(sc)
        key_points.append((sc, "study (area \u221d weight)"))
    obstacles.append(np.column_stack([y, v_obs, 0.5 * np.sqrt(areas)]))

    art["filled"] = None
    fill_areas = np.empty(0)
    if filled:
        fse = np.array([p[1] for p in filled])
        # an imputed study mirrors an observed one with the same SE: borrow its area
        nearest = np.abs(fse[:, None] - se[None, :]).argmin(axis=1)
        fill_areas = areas[nearest]
        art["filled"] = ax.scatter(
            fill_y,
            v_fill,
            s=fill_areas,
            facecolors="none",
            edgecolors=style.TRIMFILL,
            linewidths=1.0,
            marker=style.FILLED_MARKER,
            zorder=3.1,
        )
        obstacles.append(np.column_stack([fill_y, v_fill, 0.5 * np.sqrt(fill_areas)]))
        key_points.append((art["filled"], "imputed by trim and fill"))
    art["excluded"] = None
    if excluded:
        ex_area = 0.22 * preset.marker
        art["excluded"] = ax.scatter(
            excl_y,
            v_excl,
            s=ex_area,
            c=style.EXCLUDED,
            marker=style.EXCLUDED_MARKER,
            linewidths=1.0,
            zorder=3.1,
        )
        obstacles.append(
            np.column_stack([excl_y, v_excl, np.full(excl_y.size, 0.5 * math.sqrt(ex_area))])
        )
        key_points.append((art["excluded"], "excluded by the appraiser"))

    # --- labels for chosen studies (placed before the band names, which then avoid them)
    wanted = _wanted_labels(opts.labels, labels)
    if wanted:
        pts = [
            (y[i], v_obs[i], labels[i], math.sqrt(areas[i]))
            for i in range(k)
            if labels[i] in wanted
        ]
        pts += [
            (p[0], v, p[2], math.sqrt(a))
            for p, v, a in zip(filled, v_fill, fill_areas, strict=True)
            if p[2] in wanted
        ]
        pts += [
            (p[0], v, p[2], math.sqrt(0.22 * preset.marker))
            for p, v in zip(excluded, v_excl, strict=True)
            if p[2] in wanted
        ]
        obs = np.concatenate(obstacles) if obstacles else np.empty((0, 3))
        pointish = obs[obs[:, 2] > 1.0] if len(obs) else obs
        art["labels"] = _place_labels(ax, pts, pointish[:, :2], 2 * pointish[:, 2], preset)
        for t in art["labels"]:
            # a study name is an obstacle for the band names: sample its box
            (bx0, by0), (bx1, by1) = t.lopside_box
            gx, gy = np.meshgrid(np.linspace(bx0, bx1, 6), np.linspace(by0, by1, 3))
            obstacles.append(np.column_stack([gx.ravel(), gy.ravel(), np.full(gx.size, 1.0)]))

    # --- band names on the plot, or in the key
    key_bands: list[tuple[Any, str]] = []
    if art["bands"]:
        names = [name for name, _ in art["bands"]]
        placed = []
        if opts.band_labels == "direct":
            placed = _label_bands(
                ax,
                inp,
                preset,
                [zs[p] for p in levels],
                names,
                grid,
                se_grid,
                (x_lo, x_hi),
                np.concatenate(obstacles),
            )
        art["band_labels"] = placed
        if not placed:
            from matplotlib.patches import Patch

            for name, colour_ in zip(names, style.BAND_RAMP, strict=False):
                key_bands.append(
                    (Patch(facecolor=colour_, edgecolor=style.BAND_EDGE, lw=0.4), name)
                )

    # --- caption and key
    art["caption"] = None
    if opts.caption:
        art["caption"] = ax.set_title(
            _caption(ax, inp, opts, k, len(filled), len(excluded), preset),
            loc="left",
            fontsize=preset.font * 0.85,
            color=style.MUTED,
            pad=4,
        )
    art["legend"] = _legend(ax, opts, key_points, key_lines, key_bands, preset)
    return art


def _finite(x) -> bool:
    return x is not None and isinstance(x, (int, float, np.floating)) and math.isfinite(x)


def _finite_point(p) -> bool:
    try:
        return _finite(float(p[0])) and _finite(float(p[1])) and float(p[1]) > 0
    except (TypeError, ValueError, IndexError):
        return False


def _fmt_p(p: float) -> str:
    return f"{p:.2f}" if p >= 0.01 else f"{p:g}"


def band_names(levels) -> list[str]:
    """Names of the bands from "not significant" outwards, e.g. for (0.10, 0.05, 0.01):
    ["p > 0.10", "p 0.05–0.10", "p 0.01–0.05", "p < 0.01"]."""
    levels = sorted({float(p) for p in levels}, reverse=True)
    names = [f"p > {_fmt_p(levels[0])}"]
    for hi, lo in zip(levels[:-1], levels[1:], strict=False):
        names.append(f"p {_fmt_p(lo)}\u2013{_fmt_p(hi)}")
    names.append(f"p < {_fmt_p(levels[-1])}")
    return names


def _draw_bands(ax, inp, levels, zs, grid, se_grid, xlim, art) -> None:
    """Fill the significance bands (each its own polygons, no overlaps) and their edges."""
    x_lo, x_hi = xlim
    ramp = style.BAND_RAMP
    names = band_names(levels)
    zlist = [zs[p] for p in levels]  # ascending z
    null = inp.null
    polys = []
    pc = ax.fill_betweenx(
        grid,
        null - zlist[0] * se_grid,
        null + zlist[0] * se_grid,
        facecolor=ramp[0],
        edgecolor="none",
        zorder=0.5,
    )
    polys.append((names[0], [pc]))
    for i in range(len(zlist)):
        inner = zlist[i] * se_grid
        if i + 1 < len(zlist):
            outer_l = null - zlist[i + 1] * se_grid
            outer_r = null + zlist[i + 1] * se_grid
        else:
            span = x_hi - x_lo
            outer_l = np.full_like(se_grid, x_lo - span)
            outer_r = np.full_like(se_grid, x_hi + span)
        col = ramp[min(i + 1, len(ramp) - 1)]
        kw = dict(facecolor=col, edgecolor="none", zorder=0.5)
        left = ax.fill_betweenx(grid, outer_l, null - inner, **kw)
        right = ax.fill_betweenx(grid, null + inner, outer_r, **kw)
        polys.append((names[i + 1], [left, right]))
    for p in levels:
        z = zs[p]
        kw = dict(color=style.BAND_EDGE, lw=style.LINE_WIDTH["band_edge"], zorder=0.6)
        (le,) = ax.plot(null - z * se_grid, grid, **kw)
        (re,) = ax.plot(null + z * se_grid, grid, **kw)
        art["contour_edges"][p] = (le, re)
    art["bands"] = polys


#: band names are written horizontally at this size at least (points), to be read at a
#: glance in the window and on a page; where a band has no room for its name at that
#: size, the names go to the key. The small "column" size for print keeps its 7-pt type.
BAND_LABEL_MIN_PT = 8.0


def _band_label_pt(preset) -> float:
    return max(BAND_LABEL_MIN_PT, preset.font * 0.9) if preset.font >= 8 else preset.font * 0.9


def _label_bands(ax, inp, preset, zlist, names, grid, se_grid, xlim, obstacles):
    """Write each band's name horizontally inside the band, clear of points.

    The name's box must fit between the band's edges along its whole height (the edges
    slant, so the narrower end decides). Candidate rows run from near the wide end of the
    funnel upwards, on the emptier side first. Returns the Text artists, or [] when some
    band has no spot where its name fits (the caller then lists the bands in the key).
    """
    fs = _band_label_pt(preset)
    null = inp.null
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


def _wanted_labels(spec, labels: tuple[str, ...]) -> set[str]:
    if not spec:
        return set()
    if isinstance(spec, str):
        if spec == "all":
            return set(labels)
        spec = [s.strip() for s in spec.split(",")]
    return {s for s in spec if s}


def _place_labels(ax, pts, obstacles, radii, preset) -> list:
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


def _overlap(a, b) -> bool:
    return not (a[2] <= b[0] or b[2] <= a[0] or a[3] <= b[1] or b[3] <= a[1])


def _caption(
    ax, inp: FunnelInput, opts: FunnelOptions, k: int, n_filled: int, n_excl: int, preset
) -> str:
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


def _legend(ax, opts: FunnelOptions, points, lines, bands, preset):
    """The key: points, then lines, then bands (each group kept together in the columns)."""
    if opts.legend == "none":
        return None
    items = points + lines + bands
    if not items:
        return None
    # the key names the bands when they do not fit on the plot: at least 8 pt, like them
    fs = max(BAND_LABEL_MIN_PT, preset.font * 0.8) if preset.font >= 8 else preset.font * 0.8
    names = [n for _, n in items]
    if opts.legend == "inside":
        leg = ax.legend(
            [h for h, _ in items],
            names,
            loc="best",
            fontsize=fs,
            frameon=True,
            framealpha=0.9,
            edgecolor=style.RULE,
        )
    else:
        width_pt = ax.figure.get_size_inches()[0] * 72.0 * 0.94
        widest = max(text_width_pt(n, fs) for n in names) + 3.6 * fs
        ncol = max(1, min(3, int(width_pt // widest)))
        # pad each group to whole columns so a group never starts mid-column
        rows = math.ceil(len(items) / ncol)
        groups = [g for g in (points, lines, bands) if g]
        if len(groups) <= ncol:
            rows = max(len(g) for g in groups)
            spare = ncol - len(groups)
            # long groups may take a second column when there are spare columns
            while spare > 0 and rows > 1:
                longest = max(groups, key=len)
                if len(longest) <= rows // 2 + 1:
                    break
                rows = max(
                    math.ceil(len(longest) / 2), max(len(g) for g in groups if g is not longest)
                )
                spare -= 1
            padded = []
            for g in groups:
                chunks = [g[j : j + rows] for j in range(0, len(g), rows)]
                for ch in chunks:
                    padded += ch + [(None, None)] * (rows - len(ch))
            handles, labels = _blank_pad(padded)
            ncol = len(padded) // rows
        else:
            handles, labels = [h for h, _ in items], names
        kw = dict(
            ncols=ncol,
            fontsize=fs,
            frameon=False,
            columnspacing=1.4,
            handletextpad=0.5,
        )
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
    # key markers at one size: marker area in the key says nothing about weight
    for h in leg.legend_handles:
        if hasattr(h, "set_sizes"):
            h.set_sizes([0.35 * preset.marker])
    return leg


def _blank_pad(items):
    from matplotlib.patches import Rectangle

    handles, labels = [], []
    for h, n in items:
        if h is None:
            handles.append(Rectangle((0, 0), 0, 0, fill=False, edgecolor="none", visible=False))
            labels.append("")
        else:
            handles.append(h)
            labels.append(n)
    return handles, labels


def funnel_figure(
    inp: FunnelInput, opts: FunnelOptions | None = None, size: str = "column"
) -> Figure:
    """A new :class:`~matplotlib.figure.Figure` holding one funnel plot.

    The plot is drawn twice: once to let the layout settle, then again at the settled
    axes position so band names and study labels are placed against the real geometry.

    Parameters
    ----------
    inp : FunnelInput
    opts : FunnelOptions, optional
    size : {"column", "page", "slide"}

    Returns
    -------
    matplotlib.figure.Figure
        With ``fig.lopside_artists`` set to the dict returned by :func:`draw_funnel`.
    """
    from matplotlib.figure import Figure

    preset = style.size_preset(size)
    opts = opts or FunnelOptions()
    with style.style_context(preset.font):
        fig = Figure(figsize=(preset.width, preset.height), layout="constrained")
        ax = fig.add_subplot()
        draw_funnel(ax, inp, opts, size=preset.name)
        fig.draw_without_rendering()
        pos = ax.get_position()
        fig.clear()
        ax = fig.add_subplot()
        ax.set_position(pos)
        art = draw_funnel(ax, inp, opts, size=preset.name)
        fig.lopside_artists = art
    return fig
