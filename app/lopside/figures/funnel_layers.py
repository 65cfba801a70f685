"""The funnel's layers: axes, significance bands, reference lines and limits, studies.

Each layer has a ``draw_*`` function that makes its artists from a
:class:`~lopside.figures.funnel_frame.Frame` and an ``update_*`` function that moves the
same artists to a new frame's numbers in place (offsets, sizes, polygons, line data), so
a window can follow an edit without building the figure again. An update is only valid
when the drawing's structure (:func:`lopside.figures.funnel.structure`) is unchanged.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from . import style
from .common import effect_axis_label, format_effect, set_effect_axis
from .funnel_frame import AXIS_TITLES, Frame, _finite

# --------------------------------------------------------------------------------------
# Axes


def set_up_axes(ax, inp, opts, fr: Frame, preset) -> None:
    """Scales, limits, titles and tick style of the funnel's axes."""
    x_lo, x_hi = fr.xlim
    if opts.axis == "size":
        ax.set_yscale("log")
    set_effect_axis(ax, inp.measure, x_lo, x_hi, "x")
    # matplotlib draws ylim[0] at the bottom: SE/variance get (max, 0), so 0 sits at the
    # top; precision/size get (min, max).
    ax.set_ylim(fr.bottom, fr.top)
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


def update_axes(ax, inp, fr: Frame) -> None:
    set_effect_axis(ax, inp.measure, fr.xlim[0], fr.xlim[1], "x")
    ax.set_ylim(fr.bottom, fr.top)


# --------------------------------------------------------------------------------------
# Significance bands


def band_names(levels) -> list[str]:
    """Names of the bands from "not significant" outwards, e.g. for (0.10, 0.05, 0.01):
    ["p > 0.10", "p 0.05–0.10", "p 0.01–0.05", "p < 0.01"]."""
    levels = sorted({float(p) for p in levels}, reverse=True)
    names = [f"p > {_fmt_p(levels[0])}"]
    for hi, lo in zip(levels[:-1], levels[1:], strict=False):
        names.append(f"p {_fmt_p(lo)}\u2013{_fmt_p(hi)}")
    names.append(f"p < {_fmt_p(levels[-1])}")
    return names


def _fmt_p(p: float) -> str:
    return f"{p:.2f}" if p >= 0.01 else f"{p:g}"


def _band_bounds(fr: Frame, null: float) -> list[tuple[np.ndarray, np.ndarray]]:
    """(left x, right x) of each filled polygon, in drawing order: the inner band, then
    each outer band's left and right halves."""
    x_lo, x_hi = fr.xlim
    zlist = [fr.zs[p] for p in fr.levels]  # ascending z
    g = fr.se_grid
    out = [(null - zlist[0] * g, null + zlist[0] * g)]
    for i in range(len(zlist)):
        inner = zlist[i] * g
        if i + 1 < len(zlist):
            outer_l = null - zlist[i + 1] * g
            outer_r = null + zlist[i + 1] * g
        else:
            span = x_hi - x_lo
            outer_l = np.full_like(g, x_lo - span)
            outer_r = np.full_like(g, x_hi + span)
        out += [(outer_l, null - inner), (null + inner, outer_r)]
    return out


def draw_bands(ax, fr: Frame, null: float, art: dict) -> None:
    """Fill the significance bands (each its own polygons, no overlaps) and their edges."""
    ramp = style.BAND_RAMP
    names = band_names(fr.levels)
    bounds = _band_bounds(fr, null)
    (lo, hi), rest = bounds[0], bounds[1:]
    pc = ax.fill_betweenx(fr.grid, lo, hi, facecolor=ramp[0], edgecolor="none", zorder=0.5)
    polys = [(names[0], [pc])]
    for i in range(len(rest) // 2):
        col = ramp[min(i + 1, len(ramp) - 1)]
        kw = dict(facecolor=col, edgecolor="none", zorder=0.5)
        left = ax.fill_betweenx(fr.grid, *rest[2 * i], **kw)
        right = ax.fill_betweenx(fr.grid, *rest[2 * i + 1], **kw)
        polys.append((names[i + 1], [left, right]))
    for p in fr.levels:
        z = fr.zs[p]
        kw = dict(color=style.BAND_EDGE, lw=style.LINE_WIDTH["band_edge"], zorder=0.6)
        (le,) = ax.plot(null - z * fr.se_grid, fr.grid, **kw)
        (re,) = ax.plot(null + z * fr.se_grid, fr.grid, **kw)
        art["contour_edges"][p] = (le, re)
    art["bands"] = polys


def update_bands(art: dict, fr: Frame, null: float) -> bool:
    """Move the band polygons and edges to ``fr``; False when this matplotlib cannot."""
    colls = [pc for _, group in art["bands"] for pc in group]
    if not all(hasattr(pc, "set_data") for pc in colls):
        return False  # matplotlib < 3.10: no FillBetweenPolyCollection
    for pc, (lo, hi) in zip(colls, _band_bounds(fr, null), strict=True):
        pc.set_data(fr.grid, lo, hi)
    for p, (le, re) in art["contour_edges"].items():
        z = fr.zs[p]
        le.set_data(null - z * fr.se_grid, fr.grid)
        re.set_data(null + z * fr.se_grid, fr.grid)
    return True


# --------------------------------------------------------------------------------------
# Reference lines and limits


def _egger_x(inp, opts, fr: Frame):
    if opts.egger_line and inp.egger is not None and all(_finite(v) for v in inp.egger):
        intercept, slope = inp.egger
        return slope + intercept * fr.se_grid
    return None


def draw_lines(ax, inp, opts, fr: Frame, art: dict) -> list[tuple[Any, str]]:
    """The null line, the pooled estimate with its pseudo-confidence limits, and the
    overlays (Egger line, adjusted and limit estimates); returns their key entries."""
    key: list[tuple[Any, str]] = []
    art["null"] = ax.axvline(
        inp.null,
        color=style.NULL_LINE,
        lw=style.LINE_WIDTH["null"],
        ls=style.LINE_STYLE["null"],
        zorder=2,
    )
    key.append((art["null"], "no effect"))
    art["pooled"] = art["pseudo_limits"] = None
    if _finite(inp.pooled):
        art["pooled"] = ax.axvline(
            inp.pooled, color=style.INK, lw=style.LINE_WIDTH["pooled"], zorder=2.2
        )
        key.append((art["pooled"], pooled_name(inp)))
        if opts.pseudo_limits:
            half = fr.z_pseudo * fr.se_grid
            kw = dict(
                color=style.INK,
                lw=style.LINE_WIDTH["pseudo"],
                ls=style.LINE_STYLE["pseudo"],
                zorder=2.1,
            )
            (left,) = ax.plot(inp.pooled - half, fr.grid, **kw)
            (right,) = ax.plot(inp.pooled + half, fr.grid, **kw)
            art["pseudo_limits"] = (left, right)
            key.append((left, f"pseudo {opts.pseudo_level:.0%} limits"))
    art["egger"] = art["adjusted"] = art["limit"] = None
    ex = _egger_x(inp, opts, fr)
    if ex is not None:
        (art["egger"],) = ax.plot(
            ex,
            fr.grid,
            color=style.EGGER,
            lw=style.LINE_WIDTH["overlay"],
            ls=style.LINE_STYLE["egger"],
            zorder=2.4,
        )
        key.append((art["egger"], "Egger regression line"))
    for name, value, on, colour in _overlays(inp, opts):
        if on and _finite(value):
            art[name] = ax.axvline(
                value,
                color=colour,
                lw=style.LINE_WIDTH["overlay"],
                ls=style.LINE_STYLE[name],
                zorder=2.3,
            )
            key.append((art[name], overlay_name(name, value, inp.measure)))
    return key


def _overlays(inp, opts):
    return (
        ("adjusted", inp.adjusted, opts.adjusted_line, style.TRIMFILL),
        ("limit", inp.limit, opts.limit_line, style.LIMIT),
    )


_OVERLAY_WORDS = {"adjusted": "after trim and fill", "limit": "limit meta-analysis"}


def pooled_name(inp) -> str:
    name = f"pooled ({inp.model_label})" if inp.model_label else "pooled estimate"
    return f"{name}: {format_effect(inp.pooled, inp.measure)}"


def overlay_name(name: str, value: float, measure: str) -> str:
    return f"{_OVERLAY_WORDS[name]}: {format_effect(value, measure)}"


def line_key_names(inp, opts) -> list[str]:
    """The key entries :func:`draw_lines` makes, as words (values included)."""
    names = ["no effect"]
    if _finite(inp.pooled):
        names.append(pooled_name(inp))
        if opts.pseudo_limits:
            names.append(f"pseudo {opts.pseudo_level:.0%} limits")
    if opts.egger_line and inp.egger is not None and all(_finite(v) for v in inp.egger):
        names.append("Egger regression line")
    for name, value, on, _ in _overlays(inp, opts):
        if on and _finite(value):
            names.append(overlay_name(name, value, inp.measure))
    return names


def update_lines(art: dict, inp, opts, fr: Frame) -> None:
    art["null"].set_xdata([inp.null, inp.null])
    if art["pooled"] is not None:
        art["pooled"].set_xdata([inp.pooled, inp.pooled])
    if art["pseudo_limits"] is not None:
        half = fr.z_pseudo * fr.se_grid
        left, right = art["pseudo_limits"]
        left.set_data(inp.pooled - half, fr.grid)
        right.set_data(inp.pooled + half, fr.grid)
    if art["egger"] is not None:
        art["egger"].set_data(_egger_x(inp, opts, fr), fr.grid)
    for name, value, _on, _ in _overlays(inp, opts):
        if art[name] is not None:
            art[name].set_xdata([value, value])


# --------------------------------------------------------------------------------------
# Studies: observed, imputed by trim and fill, excluded


def study_groups(inp, opts, k: int) -> tuple[str, dict] | None:
    """(kind, {group: (colour, marker)}) when the studies are coloured by group."""
    if not (opts.colour_by != "none" and len(inp.groups) == k and any(inp.groups)):
        return None
    kind = "risk_of_bias" if opts.colour_by == "risk_of_bias" else inp.group_kind
    return kind, style.group_styles(tuple(inp.groups), kind)


def _group_index(inp, g: str, k: int) -> np.ndarray:
    return np.array([i for i in range(k) if inp.groups[i] == g])


def draw_studies(ax, inp, opts, fr: Frame, art: dict) -> list[tuple[Any, str]]:
    """The study markers (area ∝ weight), imputed and excluded studies; their key entries."""
    key: list[tuple[Any, str]] = []
    art["studies"] = []
    groups = study_groups(inp, opts, fr.k)
    if groups is not None:
        kind, styles = groups
        if inp.group_title:
            # a key heading: an invisible handle with the title as its text
            (head,) = ax.plot([], [], ls="none")
            key.append((head, inp.group_title + ":"))
        for g, (col, mk) in styles.items():
            idx = _group_index(inp, g, fr.k)
            sc = ax.scatter(
                fr.y[idx],
                fr.v_obs[idx],
                s=fr.areas[idx],
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
            key.append((sc, name))
    else:
        sc = ax.scatter(
            fr.y,
            fr.v_obs,
            s=fr.areas,
            c=style.INK,
            marker=style.STUDY_MARKER,
            edgecolors=style.STUDY_EDGE,
            linewidths=0.5,
            alpha=style.STUDY_ALPHA,
            zorder=3,
        )
        art["studies"].append(sc)
        key.append((sc, "study (area \u221d weight)"))
    art["filled"] = art["excluded"] = None
    if fr.filled:
        art["filled"] = ax.scatter(
            fr.fill_y,
            fr.v_fill,
            s=fr.fill_areas,
            facecolors="none",
            edgecolors=style.TRIMFILL,
            linewidths=1.0,
            marker=style.FILLED_MARKER,
            zorder=3.1,
        )
        key.append((art["filled"], "imputed by trim and fill"))
    if fr.excluded:
        art["excluded"] = ax.scatter(
            fr.excl_y,
            fr.v_excl,
            s=fr.ex_area,
            c=style.EXCLUDED,
            marker=style.EXCLUDED_MARKER,
            linewidths=1.0,
            zorder=3.1,
        )
        key.append((art["excluded"], "excluded by the appraiser"))
    return key


def update_studies(art: dict, inp, opts, fr: Frame) -> None:
    groups = study_groups(inp, opts, fr.k)
    if groups is None:
        parts = [np.arange(fr.k)]
    else:
        parts = [_group_index(inp, g, fr.k) for g in groups[1]]
    for sc, idx in zip(art["studies"], parts, strict=True):
        sc.set_offsets(np.column_stack([fr.y[idx], fr.v_obs[idx]]))
        sc.set_sizes(fr.areas[idx])
    if art["filled"] is not None:
        art["filled"].set_offsets(np.column_stack([fr.fill_y, fr.v_fill]))
        art["filled"].set_sizes(fr.fill_areas)
    if art["excluded"] is not None:
        art["excluded"].set_offsets(np.column_stack([fr.excl_y, fr.v_excl]))


def study_structure(inp, opts, fr: Frame) -> tuple:
    """What decides the study layer's artists (not their positions)."""
    groups = study_groups(inp, opts, fr.k)
    names = () if groups is None else (groups[0], tuple(groups[1].items()), inp.group_title)
    return names, bool(fr.filled), bool(fr.excluded), math.isfinite(fr.ex_area)
