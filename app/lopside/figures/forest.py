"""The forest plot: study rows, subgroup blocks with subtotals, pooled diamonds.

Design invariants
-----------------
* No statistic is computed here. Study rows, subtotals and pooled results arrive as
  plain numbers; :func:`lopside.figures.adaptors.forest_input_from_result` gets the
  subtotals from the pooling engine (:mod:`lopside.stats.pooling`).
* Effects are on the analysis scale; ratio measures are drawn on a log axis labelled in
  natural units, and the text columns print natural-scale values.
* The figure grows in height with its rows (fixed row pitch), so 100+ studies stay
  readable; labels too long for their column are shortened with an ellipsis.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING

from . import style
from .common import FigureInputError, format_effect, format_interval, is_ratio, measure_label
from .rows import Column, Row, draw_rows

if TYPE_CHECKING:  # pragma: no cover
    from collections.abc import Sequence

    from matplotlib.figure import Figure


@dataclass(frozen=True, slots=True)
class ForestRow:
    """One study: effect and CI on the analysis scale, weight in percent."""

    label: str
    estimate: float
    ci_low: float
    ci_high: float
    weight: float = math.nan
    group: str = ""


@dataclass(frozen=True, slots=True)
class ForestSummary:
    """A pooled result (overall or subgroup) on the analysis scale.

    ``pi_low``/``pi_high`` hold the prediction interval when there is one.
    """

    label: str
    estimate: float
    ci_low: float
    ci_high: float
    weight: float = math.nan
    k: int = 0
    pi_low: float | None = None
    pi_high: float | None = None


@dataclass(frozen=True, slots=True)
class ForestPooled:
    """The pooled part of a forest plot.

    Attributes
    ----------
    fixed, random : ForestSummary or None
        Overall results; None when not computable (the note says why).
    subtotals : tuple of (group, ForestSummary or None)
        One per subgroup, in the order the groups first appear.
    subtotal_model : str
        Words for the subtotals' model, for the caption ("random effects (REML)").
    heterogeneity : str
        A ready-made line ("I² = 41%, τ² = 0.03, Q = 18.6 on 11 df, p = 0.07"), or "".
    note : str
        Anything else worth a footnote (e.g. why the random-effects result is missing).
    """

    fixed: ForestSummary | None = None
    random: ForestSummary | None = None
    subtotals: tuple[tuple[str, ForestSummary | None], ...] = ()
    subtotal_model: str = ""
    heterogeneity: str = ""
    note: str = ""


@dataclass(frozen=True, slots=True)
class ForestOptions:
    """How to draw the forest plot.

    Attributes
    ----------
    measure : str
    favours : {"lower", "higher"}
        Which direction favours the intervention (the review's own).
    int_label, ctl_label : str
        Arm names for the "favours ..." words.
    size : {"column", "page", "slide"}
    confidence_level : float
    weight_model : str
        Words for the model whose weights the weight column shows.
    show_fixed, show_random, show_prediction : bool
    caption : str
        Caption line; "" builds one from the measure and k.
    width : float or None
    units : str
    """

    measure: str = "OR"
    favours: str = "lower"
    int_label: str = "intervention"
    ctl_label: str = "control"
    size: str = "column"
    confidence_level: float = 0.95
    weight_model: str = ""
    show_fixed: bool = True
    show_random: bool = True
    show_prediction: bool = True
    caption: str = ""
    #: lay out for this width (inches) instead of the size preset's (window panels)
    width: float | None = None
    #: the outcome's units, on the axis title of mean differences
    units: str = ""


def favours_words(favours: str, int_label: str, ctl_label: str) -> tuple[str, str]:
    """Words for the left and right of the null: ("favours <arm>", "favours <arm>").

    With ``favours == "lower"`` effects below the null favour the intervention.
    """
    int_w = f"favours {int_label or 'intervention'}"
    ctl_w = f"favours {ctl_label or 'control'}"
    return (int_w, ctl_w) if favours != "higher" else (ctl_w, int_w)


def _weight_text(w: float) -> str:
    if w is None or not math.isfinite(w):
        return ""
    if w < 0.1:
        return "<0.1%"
    return f"{w:.1f}%"


def _study_row(r: ForestRow, measure: str, indent: bool) -> Row:
    return Row(
        kind="study",
        label=r.label,
        estimate=r.estimate,
        low=r.ci_low,
        high=r.ci_high,
        weight=r.weight,
        cells=(
            format_effect(r.estimate, measure),
            format_interval(r.ci_low, r.ci_high, measure),
            _weight_text(r.weight),
        ),
        indent=indent,
    )


def _summary_row(
    s: ForestSummary, measure: str, colour: str, hollow: bool, bold: bool, weight: bool = True
) -> Row:
    return Row(
        kind="summary",
        label=s.label,
        estimate=s.estimate,
        low=s.ci_low,
        high=s.ci_high,
        cells=(
            format_effect(s.estimate, measure),
            format_interval(s.ci_low, s.ci_high, measure),
            _weight_text(s.weight) if weight else "",
        ),
        colour=colour,
        hollow=hollow,
        bold=bold,
        height=1.1,
    )


def forest_rows(
    rows: Sequence[ForestRow], pooled: ForestPooled, opts: ForestOptions, subtotal_colour: str
) -> list[Row]:
    """The figure rows, in order: subgroup blocks (or the plain list), then the overall part."""
    m = opts.measure
    out: list[Row] = []
    groups: list[str] = []
    for r in rows:
        if r.group not in groups:
            groups.append(r.group)
    blocks = len(groups) > 1 or (groups and groups[0] != "")
    if blocks:
        subtotals = dict(pooled.subtotals)
        for g in groups:
            members = [r for r in rows if r.group == g]
            out.append(Row(kind="header", label=g or "No subgroup given", bold=True))
            out += [_study_row(r, m, indent=True) for r in members]
            sub = subtotals.get(g)
            if sub is not None:
                out.append(_summary_row(sub, m, subtotal_colour, hollow=True, bold=False))
            out.append(Row(kind="spacer", height=0.5))
    else:
        out += [_study_row(r, m, indent=False) for r in rows]
    out.append(Row(kind="rule", height=0.4))
    if opts.show_fixed and pooled.fixed is not None:
        out.append(_summary_row(pooled.fixed, m, style.FIXED, False, True, weight=False))
    if opts.show_random and pooled.random is not None:
        out.append(_summary_row(pooled.random, m, style.RANDOM, False, True, weight=False))
        rnd = pooled.random
        if opts.show_prediction and rnd.pi_low is not None and rnd.pi_high is not None:
            out.append(
                Row(
                    kind="pi",
                    label="Prediction interval",
                    estimate=rnd.estimate,
                    low=rnd.pi_low,
                    high=rnd.pi_high,
                    cells=("", format_interval(rnd.pi_low, rnd.pi_high, m), ""),
                    colour=style.RANDOM,
                )
            )
    return out


def forest_figure(
    rows: Sequence[ForestRow], pooled: ForestPooled, opts: ForestOptions | None = None
) -> Figure:
    """A forest plot as a new :class:`~matplotlib.figure.Figure`.

    Parameters
    ----------
    rows : sequence of ForestRow
        The studies, in display order (grouped rows need not be contiguous).
    pooled : ForestPooled
    opts : ForestOptions, optional

    Returns
    -------
    matplotlib.figure.Figure
        ``fig.lopside_artists`` holds the axes, squares, diamonds, bars and text rows.
    """
    opts = opts or ForestOptions()
    if not rows:
        raise FigureInputError(
            "the forest plot needs at least one study with an effect and its standard error"
        )
    level = f"{opts.confidence_level * 100:g}% CI"
    abbrev = opts.measure.upper() if opts.measure else "Effect"
    sub_colour = style.RANDOM if "random" in pooled.subtotal_model.lower() else style.FIXED
    body = forest_rows(rows, pooled, opts, sub_colour)
    k = len(rows)
    caption = opts.caption or _caption(opts, pooled, k)
    foot = "  ".join(x for x in (pooled.heterogeneity, pooled.note) if x)
    left, right = favours_words(opts.favours, opts.int_label, opts.ctl_label)
    reference = None
    if pooled.random is not None and opts.show_random:
        reference, ref_colour = pooled.random.estimate, style.RANDOM
    elif pooled.fixed is not None and opts.show_fixed:
        reference, ref_colour = pooled.fixed.estimate, style.FIXED
    else:
        ref_colour = style.INK
    fig = draw_rows(
        body,
        [
            Column(abbrev),
            Column(level, "left"),
            Column("Weight", optional=True, dropped_note="weight: area of the square"),
        ],
        measure=opts.measure,
        size=opts.size,
        caption=caption,
        footer=foot,
        label_header="Study",
        left_words=left,
        right_words=right,
        null=0.0,
        reference=reference,
        reference_colour=ref_colour,
        width=opts.width,
        units=opts.units,
    )
    return fig


def _caption(opts: ForestOptions, pooled: ForestPooled, k: int) -> str:
    parts = [measure_label(opts.measure)]
    if is_ratio(opts.measure):
        parts[0] += " (values on the natural scale)"
    parts.append(f"k = {k}")
    # the study intervals are y ± z·SE from the SE the analysis used, so a limit can differ
    # from the paper's in its last digit: said, so that a check against the paper does
    # not take it for a typing error
    parts.append("study CIs recomputed from the SE used")
    if opts.weight_model:
        parts.append(f"weights: {opts.weight_model}")
    if pooled.subtotals and pooled.subtotal_model:
        parts.append(f"subtotals: {pooled.subtotal_model}")
    return " \u00b7 ".join(parts)
