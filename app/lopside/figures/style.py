"""Lopside's palette, markers, fonts and figure sizes: the one place the look is defined.

Design invariants
-----------------
* Every figure builder draws inside :func:`style_context`, a ``matplotlib.rc_context``, so
  no builder changes matplotlib's global state.
* The font is DejaVu Sans, which ships inside matplotlib, so a figure looks the same on a
  locked-down hospital PC with no system fonts as on a developer's machine.
* Colours are plain hex strings here (no matplotlib import), so the window can read the
  palette without paying for matplotlib at start-up. ``resources/palette.md`` documents
  each colour, its use and its grayscale lightness; keep the two in step.
"""

from __future__ import annotations

from contextlib import contextmanager
from dataclasses import dataclass
from typing import TYPE_CHECKING

if TYPE_CHECKING:  # pragma: no cover
    from collections.abc import Iterator

# --------------------------------------------------------------------------------------
# Palette (see resources/palette.md for the grayscale check)

#: Text, study points and the pooled line: a blue-black "ink".
INK = "#1F2933"
#: Secondary text: captions, keys, axis notes.
MUTED = "#616E7C"
#: Light rules: the null line's companion grid, row separators.
RULE = "#C3CAD2"
#: The line of no effect.
NULL_LINE = "#52606D"
#: Background of the plotting area when contours are off.
PAPER = "#FFFFFF"

#: Significance bands of the contour-enhanced funnel, from "not significant" (lightest) to
#: the most significant band (darkest). One teal hue; CIE L* 98 / 90 / 81 / 68 so the bands
#: stay apart in grayscale print and for every kind of colour vision.
BAND_RAMP: tuple[str, ...] = ("#F6FBFA", "#CFE9E4", "#9ED2CA", "#68B3A9")
#: Thin boundary line between two bands.
BAND_EDGE = "#2E7F75"
#: Text written on the bands.
BAND_TEXT = "#1D4F49"

#: Pooled fixed-effect result (forest diamonds, cumulative plot).
FIXED = "#1F4E79"
#: Pooled random-effects result and its prediction interval.
RANDOM = "#B35C00"
#: Trim-and-fill: imputed points' outline and the adjusted estimate line. A dark brown,
#: not the vermilion of high risk of bias: the two stay apart (CIELAB distance >= 30)
#: under simulated protanopia, deuteranopia and tritanopia (tools/palette_cvd.py).
TRIMFILL = "#663311"
#: Egger regression line.
EGGER = "#8E4585"
#: Limit meta-analysis estimate line.
LIMIT = "#0072B2"
#: Excluded studies (small crosses).
EXCLUDED = "#7B8794"

#: Qualitative colours for subgroups: the Okabe & Ito (2008) colour-blind-safe set, in an
#: order of our own (yellow last: it is faint on white paper).
QUALITATIVE: tuple[str, ...] = (
    "#0072B2",
    "#D55E00",
    "#009E73",
    "#CC79A7",
    "#E69F00",
    "#56B4E9",
    "#000000",
    "#F0E442",
)
#: Marker shapes paired with the qualitative colours, so groups differ in shape as well as
#: colour (a second cue for grayscale print and colour-blind readers).
QUALITATIVE_MARKERS: tuple[str, ...] = ("o", "s", "D", "^", "v", "P", "X", "h")

#: Risk-of-bias levels: colour and marker (ordinal: blue -> amber -> vermilion).
RISK_OF_BIAS_STYLE: dict[str, tuple[str, str]] = {
    "low": ("#0072B2", "o"),
    "some concerns": ("#E69F00", "s"),
    "high": ("#D55E00", "^"),
    "": ("#9AA5B1", "p"),
}
RISK_OF_BIAS_NAMES: dict[str, str] = {
    "low": "low risk of bias",
    "some concerns": "some concerns",
    "high": "high risk of bias",
    "": "risk of bias not stated",
}

# --------------------------------------------------------------------------------------
# Markers and lines

#: Study marker (funnel, radial): filled circle with a thin paper-white rim.
STUDY_MARKER = "o"
STUDY_EDGE = "#FFFFFF"
STUDY_ALPHA = 0.88
#: Imputed (trim-and-fill) studies: a hollow diamond (a shape no risk-of-bias level uses).
FILLED_MARKER = "D"
#: Excluded studies: a small cross.
EXCLUDED_MARKER = "x"

LINE_WIDTH = {
    "null": 0.8,
    "pooled": 1.5,
    "pseudo": 0.9,
    "band_edge": 0.45,
    "overlay": 1.2,
    "ci": 0.9,
}
LINE_STYLE = {
    "null": "-",
    "pooled": "-",
    "pseudo": (0, (4, 2.5)),
    "egger": (0, (6, 2, 1.5, 2)),
    "adjusted": (0, (1.5, 1.5)),
    "limit": (0, (7, 2.5)),
}

# --------------------------------------------------------------------------------------
# Sizes


@dataclass(frozen=True, slots=True)
class SizePreset:
    """A named output size.

    Attributes
    ----------
    width, height : float
        Inches. ``height`` is the funnel's height; the forest plot grows with its rows.
    font : float
        Base font size in points.
    marker : float
        Area (points^2) of the largest study marker.
    """

    name: str
    width: float
    height: float
    font: float
    marker: float


_MM = 1.0 / 25.4
#: "column": one column of an A4 sheet (85 mm); "page": full A4 text width (180 mm);
#: "slide": a 16:9 slide.
SIZES: dict[str, SizePreset] = {
    "column": SizePreset("column", 85 * _MM, 85 * _MM, 7.0, 110.0),
    "page": SizePreset("page", 180 * _MM, 120 * _MM, 8.5, 200.0),
    "slide": SizePreset("slide", 10.0, 5.625, 12.0, 320.0),
}


def size_preset(size: str | SizePreset) -> SizePreset:
    """Return the :class:`SizePreset` called ``size`` (or ``size`` itself).

    Raises
    ------
    ValueError
        For an unknown name, listing the known ones.
    """
    if isinstance(size, SizePreset):
        return size
    try:
        return SIZES[size]
    except KeyError:
        raise ValueError(f"unknown figure size {size!r}; use one of {', '.join(SIZES)}") from None


# --------------------------------------------------------------------------------------
# rcParams

#: Written into every file's metadata instead of a date or a library version, so two
#: saves of the same figure are byte-identical.
SOFTWARE = "Lopside"

FONT_FAMILY = "DejaVu Sans"


def rc_params(font: float = 7.0) -> dict[str, object]:
    """The rcParams every builder and :func:`~lopside.figures.export.save_figure` uses.

    Parameters
    ----------
    font : float
        Base font size in points.
    """
    return {
        "font.family": "sans-serif",
        "font.sans-serif": [FONT_FAMILY],
        "font.size": font,
        "axes.titlesize": font,
        "axes.labelsize": font,
        "axes.edgecolor": INK,
        "axes.labelcolor": INK,
        "axes.linewidth": 0.7,
        "axes.facecolor": PAPER,
        "axes.unicode_minus": True,
        "axes.spines.top": False,
        "axes.spines.right": False,
        "axes.axisbelow": True,
        "xtick.labelsize": font * 0.9,
        "ytick.labelsize": font * 0.9,
        "xtick.color": INK,
        "ytick.color": INK,
        "xtick.major.width": 0.6,
        "ytick.major.width": 0.6,
        "xtick.major.size": 3.0,
        "ytick.major.size": 3.0,
        "xtick.direction": "out",
        "ytick.direction": "out",
        "legend.fontsize": font * 0.85,
        "legend.frameon": False,
        "legend.handlelength": 1.8,
        "legend.borderaxespad": 0.3,
        "figure.facecolor": PAPER,
        "figure.edgecolor": PAPER,
        "savefig.facecolor": PAPER,
        "savefig.edgecolor": PAPER,
        "lines.solid_capstyle": "butt",
        "mathtext.default": "regular",
        # Reproducible files: text kept as text, fixed ids, TrueType embedded in PDFs
        # (searchable and copyable), no date written.
        "svg.fonttype": "none",
        "svg.hashsalt": "lopside",
        "pdf.fonttype": 42,
        "ps.fonttype": 42,
        "image.interpolation": "nearest",
    }


@contextmanager
def style_context(font: float = 7.0) -> Iterator[None]:
    """Apply Lopside's style for the duration of a ``with`` block (global state untouched).

    Parameters
    ----------
    font : float
        Base font size in points.
    """
    import matplotlib

    with matplotlib.rc_context(rc_params(font)):
        yield


def group_styles(groups: tuple[str, ...], kind: str = "subgroup") -> dict[str, tuple[str, str]]:
    """Colour and marker for each distinct group label, in order of first appearance.

    Parameters
    ----------
    groups : tuple of str
        One label per study.
    kind : {"subgroup", "risk_of_bias"}
        Risk-of-bias levels get their fixed ordinal colours; other labels the qualitative set.

    Returns
    -------
    dict
        label -> (hex colour, marker).
    """
    out: dict[str, tuple[str, str]] = {}
    if kind == "risk_of_bias":
        order = list(RISK_OF_BIAS_STYLE)
        # ordinal order (low, some concerns, high, not stated), whatever the table order
        for g in sorted(set(groups), key=lambda g: _rob_rank(g, order)):
            key = (g or "").strip().lower()
            out[g] = RISK_OF_BIAS_STYLE.get(key, RISK_OF_BIAS_STYLE[""])
        return out
    i = 0
    for g in groups:
        if g in out:
            continue
        if not g:
            out[g] = (EXCLUDED, "o")
            continue
        out[g] = (
            QUALITATIVE[i % len(QUALITATIVE)],
            QUALITATIVE_MARKERS[i % len(QUALITATIVE_MARKERS)],
        )
        i += 1
    return out


def _rob_rank(g: str, order: list[str]) -> tuple[int, str]:
    key = (g or "").strip().lower()
    return (order.index(key) if key in order else len(order), key)
