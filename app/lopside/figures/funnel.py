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

Layout of the code: :mod:`.funnel_frame` computes the numbers (ranges, grid, marker areas,
obstacles), :mod:`.funnel_layers` draws the axes, bands, lines and studies,
:mod:`.funnel_labels` places band and study names, :mod:`.funnel_key` writes the caption
and the key; :func:`draw_funnel` composes them, and :func:`update_funnel` moves an
existing drawing to new numbers in place when its structure is unchanged (the window's
live redraw).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from . import style
from .funnel_frame import (  # noqa: F401 - the funnel's public geometry, re-exported
    AXIS_TITLES,
    DEFAULT_LEVELS,
    FUNNEL_AXES,
    Point,
    _arr,
    contour_edges,
    frame_of,
    line_obstacles,
    point_obstacles,
    z_for_level,
)
from .funnel_key import caption_text, draw_caption, draw_legend, update_legend
from .funnel_labels import band_label_spots, name_study_points, wanted_labels, write_band_labels
from .funnel_layers import (  # noqa: F401 - band_names is part of the public API
    band_names,
    draw_bands,
    draw_lines,
    draw_studies,
    line_key_names,
    set_up_axes,
    study_structure,
    update_axes,
    update_bands,
    update_lines,
    update_studies,
)

if TYPE_CHECKING:  # pragma: no cover
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure


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
# Drawing: the layers composed


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
    fr = frame_of(inp, opts, preset.marker)
    set_up_axes(ax, inp, opts, fr, preset)
    art: dict[str, Any] = {
        "geometry": fr.geometry(),
        "bands": [],
        "band_labels": [],
        "contour_edges": {},
        "labels": [],
    }
    if opts.contours and fr.levels:  # filled first: everything else sits on them
        draw_bands(ax, fr, inp.null, art)
    key_lines = draw_lines(ax, inp, opts, fr, art)
    key_points = draw_studies(ax, inp, opts, fr, art)
    # things names must not cover: (x, axis value, radius in points)
    obstacles = line_obstacles(inp, opts, fr) + point_obstacles(fr)
    wanted = wanted_labels(opts.labels, fr.labels)
    if wanted:  # study names first: the band names then avoid them
        art["labels"] = name_study_points(ax, fr, wanted, obstacles, preset)
    key_bands: list[tuple[Any, str]] = []
    if art["bands"]:
        art["band_labels"] = _band_labels(ax, inp, opts, fr, art, obstacles, preset) or []
        if not art["band_labels"]:
            from matplotlib.patches import Patch

            for (name, _), colour in zip(art["bands"], style.BAND_RAMP, strict=False):
                key_bands.append((Patch(facecolor=colour, edgecolor=style.BAND_EDGE, lw=0.4), name))
    art["caption"] = None
    if opts.caption:
        text = caption_text(ax, inp, opts, fr.k, len(fr.filled), len(fr.excluded), preset)
        art["caption"] = draw_caption(ax, text, preset)
    art["legend"] = draw_legend(ax, opts, key_points, key_lines, key_bands, preset)
    art["structure"] = structure(inp, opts, fr, preset)
    art["key_groups"] = [[n for _, n in g] for g in (key_points, key_lines, key_bands)]
    return art


def _band_labels(ax, inp, opts, fr, art, obstacles, preset, *, write: bool = True):
    """The band names placed on the plot (Text artists), or spots only with ``write``
    False; None when they go to the key."""
    if opts.band_labels != "direct":
        return None
    spots = band_label_spots(
        ax,
        inp.null,
        preset,
        [fr.zs[p] for p in fr.levels],
        [name for name, _ in art["bands"]],
        fr.grid,
        fr.se_grid,
        fr.xlim,
        np.concatenate(obstacles),
    )
    if not spots:
        return None
    return write_band_labels(ax, spots, preset) if write else spots


def structure(inp: FunnelInput, opts: FunnelOptions, fr, preset) -> tuple:
    """What decides which artists a drawing has (not where they lie or what numbers they
    print): two drawings with equal structures differ only in data, so one can be
    updated into the other in place."""
    lines = tuple(n.split(":")[0] for n in line_key_names(inp, opts))
    return (
        opts,
        preset.name,
        inp.measure,
        inp.units,
        fr.levels,
        lines,
        study_structure(inp, opts, fr),
        bool(wanted_labels(opts.labels, fr.labels)),
    )


def update_funnel(
    ax: Axes, art: dict[str, Any], inp: FunnelInput, opts: FunnelOptions, *, size: str = "column"
) -> bool:
    """Move a drawing made by :func:`draw_funnel` on ``ax`` to new data in place.

    The artists keep their identity; offsets, sizes, polygons, line data, limits and
    words change. Returns False (the drawing is then partly updated: draw it afresh)
    when the new data need other artists: another structure, band names that no longer
    fit on the plot (or now fit), a key of another shape, or a caption on more lines.

    Raises
    ------
    FigureInputError
        As :func:`draw_funnel`.
    """
    preset = style.size_preset(size)
    with style.style_context(preset.font):
        fr = frame_of(inp, opts, preset.marker)
        if art.get("structure") != structure(inp, opts, fr, preset):
            return False
        update_axes(ax, inp, fr)
        if art["bands"] and not update_bands(art, fr, inp.null):
            return False
        update_lines(art, inp, opts, fr)
        update_studies(art, inp, opts, fr)
        obstacles = line_obstacles(inp, opts, fr) + point_obstacles(fr)
        if art["labels"]:
            for t in art["labels"]:
                t.remove()
            wanted = wanted_labels(opts.labels, fr.labels)
            art["labels"] = name_study_points(ax, fr, wanted, obstacles, preset)
        if art["bands"]:
            spots = _band_labels(ax, inp, opts, fr, art, obstacles, preset, write=False)
            if len(spots or ()) != len(art["band_labels"]):
                return False
            for t, (x, v, _name) in zip(art["band_labels"], spots or (), strict=True):
                t.set_position((x, v))
        if art["caption"] is not None:
            text = caption_text(ax, inp, opts, fr.k, len(fr.filled), len(fr.excluded), preset)
            if text.count("\n") != art["caption"].get_text().count("\n"):
                return False
            art["caption"].set_text(text)
        groups = art["key_groups"]
        groups = [groups[0], line_key_names(inp, opts), groups[2]]
        if not update_legend(art["legend"], opts, groups, preset):
            return False
        art["key_groups"] = groups
        art["geometry"] = fr.geometry()
    return True


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
    # the axes now has a fixed position, which constrained layout leaves alone (a set
    # position takes it out of the layout): another layout pass at each draw or save
    # would only cost time (the same bytes without it, tests/test_figures_layout.py)
    fig.set_layout_engine("none")
    return fig
