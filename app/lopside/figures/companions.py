"""Companion figures: cumulative meta-analysis by precision, and the radial (Galbraith) plot.

Neither builder computes a statistic: the cumulative steps come from the analysis, and
the radial plot's line is the fixed-effect estimate it is given. The radial plot's axes
are the standard transformation (Galbraith 1988, Stat Med): x = 1/SE, z = y/SE, so a
line through the origin with slope θ is the fixed-effect estimate and z = θx ± 2 bounds
about 95 % of studies when there is no heterogeneity.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from . import style
from .common import (
    READ_CUMULATIVE,
    READ_RADIAL,
    FigureInputError,
    format_effect,
    format_interval,
    measure_label,
)
from .rows import Column, Row, draw_rows, wrap_words

if TYPE_CHECKING:  # pragma: no cover
    from collections.abc import Sequence

    from matplotlib.axes import Axes
    from matplotlib.figure import Figure


# --------------------------------------------------------------------------------------
# Cumulative meta-analysis


@dataclass(frozen=True, slots=True)
class CumulativeStep:
    """The pooled result after adding ``label`` (``k`` studies so far), analysis scale."""

    label: str
    estimate: float
    ci_low: float
    ci_high: float
    k: int


@dataclass(frozen=True, slots=True)
class CumulativeInput:
    """Successive pooled estimates, most precise study first.

    Attributes
    ----------
    steps : tuple of CumulativeStep
    measure : str
    model_label : str
        Words for the pooling model ("fixed effect").
    order_label : str
        How studies were ordered (shown in the caption).
    """

    steps: tuple[CumulativeStep, ...]
    measure: str
    model_label: str = ""
    order_label: str = "most precise study first"
    favours: str = "lower"
    int_label: str = "intervention"
    ctl_label: str = "control"
    #: the outcome's units, on the axis title of mean differences
    units: str = ""


def cumulative_figure(
    inp: CumulativeInput, size: str = "column", width: float | None = None
) -> Figure:
    """Forest-like plot of the pooled estimate as studies are added in order of precision.

    A drift of the estimate as the less precise studies come in is the small-study effect
    seen another way. The last row is the estimate with every study; a dashed line marks
    it across all rows.

    Parameters
    ----------
    inp : CumulativeInput
    size : {"column", "page", "slide"}
    width : float, optional
        Lay out for this width (inches) instead of the size preset's.

    Returns
    -------
    matplotlib.figure.Figure
    """
    from .forest import favours_words

    if not inp.steps:
        raise FigureInputError("the cumulative plot needs at least one pooled step")
    m = inp.measure
    rows = []
    for i, s in enumerate(inp.steps):
        rows.append(
            Row(
                kind="point",
                label=("" if i == 0 else "+ ") + s.label,
                estimate=s.estimate,
                low=s.ci_low,
                high=s.ci_high,
                cells=(
                    format_effect(s.estimate, m),
                    format_interval(s.ci_low, s.ci_high, m),
                    str(s.k),
                ),
                colour=style.FIXED if "fixed" in inp.model_label.lower() else style.RANDOM,
            )
        )
    parts = [f"Cumulative {measure_label(m).lower()}", inp.order_label]
    if inp.model_label:
        parts.append(inp.model_label)
    left, right = favours_words(inp.favours, inp.int_label, inp.ctl_label)
    last = inp.steps[-1]
    return draw_rows(
        rows,
        [Column(m.upper()), Column("95% CI", "left"), Column("k")],
        measure=m,
        size=size,
        caption=" \u00b7 ".join(parts),
        footer=READ_CUMULATIVE,
        label_header="Studies added",
        left_words=left,
        right_words=right,
        null=0.0,
        reference=last.estimate,
        reference_colour=style.MUTED,
        width=width,
        units=inp.units,
    )


# --------------------------------------------------------------------------------------
# Radial (Galbraith) plot


@dataclass(frozen=True, slots=True, eq=False)
class RadialInput:
    """Studies and the fixed-effect estimate for a radial plot (analysis scale)."""

    measure: str
    y: Any
    se: Any
    labels: tuple[str, ...] = ()
    fixed: float | None = None
    #: Egger regression (intercept, slope) of y/SE on 1/SE: drawn as z = intercept + slope·x
    egger: tuple[float, float] | None = None


def draw_radial(
    ax: Axes, inp: RadialInput, *, size: str = "column", egger_line: bool = False
) -> dict[str, Any]:
    """Draw a radial plot on ``ax``: z = y/SE against precision 1/SE.

    Returns
    -------
    dict
        "points", "fixed_line", "bands" (lower, upper), "egger", "zero", "legend".
    """
    preset = style.size_preset(size)
    y = np.asarray(inp.y, dtype=float)
    se = np.asarray(inp.se, dtype=float)
    if y.size == 0 or y.size != se.size or not np.all(np.isfinite(y) & np.isfinite(se) & (se > 0)):
        raise FigureInputError("the radial plot needs studies with an effect and a positive SE")
    with style.style_context(preset.font):
        x = 1.0 / se
        z = y / se
        x_hi = float(x.max()) * 1.08
        xs = np.array([0.0, x_hi])
        art: dict[str, Any] = {"fixed_line": None, "bands": None, "egger": None}
        items = []
        art["zero"] = ax.axhline(0.0, color=style.NULL_LINE, lw=style.LINE_WIDTH["null"], zorder=1)
        items.append((art["zero"], "no effect (z = 0)"))
        z_all = [z, [0.0]]
        if inp.fixed is not None and math.isfinite(inp.fixed):
            th = inp.fixed
            (art["fixed_line"],) = ax.plot(
                xs, th * xs, color=style.INK, lw=style.LINE_WIDTH["pooled"], zorder=2
            )
            kw = dict(
                color=style.INK,
                lw=style.LINE_WIDTH["pseudo"],
                ls=style.LINE_STYLE["pseudo"],
                zorder=2,
            )
            (lo,) = ax.plot(xs, th * xs - 2.0, **kw)
            (hi,) = ax.plot(xs, th * xs + 2.0, **kw)
            ax.fill_between(
                xs, th * xs - 2.0, th * xs + 2.0, color=style.BAND_RAMP[1], lw=0, zorder=0.5
            )
            art["bands"] = (lo, hi)
            items.append((art["fixed_line"], f"fixed effect: {format_effect(th, inp.measure)}"))
            items.append((lo, "\u00b12 about the fixed-effect line"))
            z_all.append(th * xs - 2.0)
            z_all.append(th * xs + 2.0)
        if egger_line and inp.egger is not None and all(math.isfinite(v) for v in inp.egger):
            b0, b1 = inp.egger
            (art["egger"],) = ax.plot(
                xs,
                b0 + b1 * xs,
                color=style.EGGER,
                lw=style.LINE_WIDTH["overlay"],
                ls=style.LINE_STYLE["egger"],
                zorder=2.4,
            )
            items.append((art["egger"], "Egger regression line"))
        art["points"] = ax.scatter(
            x,
            z,
            s=0.32 * preset.marker,
            c=style.INK,
            marker=style.STUDY_MARKER,
            edgecolors=style.STUDY_EDGE,
            linewidths=0.5,
            alpha=style.STUDY_ALPHA,
            zorder=3,
        )
        items.insert(0, (art["points"], "study"))
        zz = np.concatenate([np.asarray(v, dtype=float) for v in z_all])
        pad = 0.06 * max(zz.max() - zz.min(), 1.0)
        ax.set_xlim(0.0, x_hi)
        ax.set_ylim(zz.min() - pad, zz.max() + pad)
        ax.set_autoscale_on(False)
        ax.set_xlabel("Precision (1 / standard error)")
        name = measure_label(inp.measure).lower()
        ax.set_ylabel(
            f"z = {'log ' if inp.measure.upper() in ('OR', 'RR', 'HR') else ''}{name} / SE"
        )
        ax.tick_params(labelsize=preset.font * 0.9)
        art["legend"] = ax.legend(
            [h for h, _ in items],
            [n for _, n in items],
            loc="best",
            fontsize=preset.font * 0.8,
            frameon=True,
            framealpha=0.9,
            edgecolor=style.RULE,
        )
        for h in art["legend"].legend_handles:
            if hasattr(h, "set_sizes"):
                h.set_sizes([0.3 * preset.marker])
        caption = f"Radial plot \u00b7 {measure_label(inp.measure)} \u00b7 k = {y.size}"
        width = ax.figure.get_size_inches()[0] * 72.0 * 0.9
        ax.set_title(
            wrap_words(caption, width, preset.font * 0.85, sep=" \u00b7 "),
            loc="left",
            fontsize=preset.font * 0.85,
            color=style.MUTED,
            pad=4,
        )
    return art


def radial_figure(
    inp: RadialInput,
    size: str = "column",
    *,
    egger_line: bool = False,
    width: float | None = None,
    height: float | None = None,
) -> Figure:
    """A radial (Galbraith) plot as a new Figure; see :func:`draw_radial`.

    A one-line "how to read this" caption goes under the plot. ``width``/``height``
    (inches) lay the figure out for a window panel instead of the size preset.
    """
    from matplotlib.figure import Figure

    preset = style.size_preset(size)
    w = float(width) if width else preset.width
    h = float(height) if height else preset.height
    with style.style_context(preset.font):
        fig = Figure(figsize=(w, h), layout="constrained")
        ax = fig.add_subplot()
        art = draw_radial(ax, inp, size=preset.name, egger_line=egger_line)
        small = preset.font * 0.8
        art["how_to_read"] = fig.supxlabel(
            wrap_words(READ_RADIAL, w * 72.0 * 0.96, small),
            x=0.01,
            ha="left",
            fontsize=small,
            color=style.MUTED,
        )
        fig.lopside_artists = art
    return fig


def steps_from_sequence(steps: Sequence[Any]) -> tuple[CumulativeStep, ...]:
    """CumulativeSteps from any objects with label, estimate, ci_low, ci_high, k."""
    out = []
    for s in steps:
        try:
            out.append(
                CumulativeStep(
                    str(s.label), float(s.estimate), float(s.ci_low), float(s.ci_high), int(s.k)
                )
            )
        except (AttributeError, TypeError, ValueError):
            continue
    return tuple(out)
