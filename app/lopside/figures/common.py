"""Helpers shared by the figure builders: effect axes, number formats, text fitting.

Effects are always plotted on the analysis scale (natural log for ratio measures); a
ratio axis is labelled in natural units by :func:`set_effect_axis`.
"""

from __future__ import annotations

import functools
import math
from typing import TYPE_CHECKING

if TYPE_CHECKING:  # pragma: no cover
    from matplotlib.axes import Axes

#: Measures analysed on the log scale (kept here so figures need not import the model).
RATIO_MEASURES = frozenset({"OR", "RR", "HR"})

MEASURE_LABELS: dict[str, str] = {
    "OR": "Odds ratio",
    "RR": "Risk ratio",
    "HR": "Hazard ratio",
    "RD": "Risk difference",
    "MD": "Mean difference",
    "SMD": "Standardised mean difference",
}

MINUS = "\u2212"
ELLIPSIS = "\u2026"


class FigureInputError(ValueError):
    """The inputs cannot make this figure (the message says why and what to do)."""


def is_ratio(measure: str) -> bool:
    return (measure or "").upper() in RATIO_MEASURES


def measure_label(measure: str) -> str:
    return MEASURE_LABELS.get((measure or "").upper(), measure or "Effect")


def effect_axis_label(measure: str, units: str = "") -> str:
    """Axis title for the effect axis, saying when the spacing is logarithmic.

    ``units`` (the review's optional units, e.g. "mmHg" or "points on a 0-100 scale") is
    printed for differences on the outcome's own scale (MD); ratios, risk differences and
    standardised differences have no units, so it is left out for them.
    """
    name = measure_label(measure)
    if is_ratio(measure):
        return f"{name} (log spacing)"
    units = " ".join(str(units or "").split())
    if units and (measure or "").upper() == "MD":
        return f"{name} ({units})"
    return name


#: one line under a figure that says how to read it (plain words; no statistic)
READ_CUMULATIVE = (
    "How to read this: each row pools the studies listed so far, most precise first. "
    "An estimate that drifts away from no effect as the smaller studies come in is the "
    "small-study effect seen another way."
)
READ_RADIAL = (
    "How to read this: each point is a study; more precise studies lie further right. "
    "Without small-study effects the points scatter about the line through the origin, "
    "most within the \u00b12 band; an Egger line that misses the origin means asymmetry."
)


# --------------------------------------------------------------------------------------
# Numbers


def format_number(x: float, digits: int = 2) -> str:
    """Fixed decimals with a true minus sign; "–" for a missing value."""
    if x is None or not math.isfinite(x):
        return "\u2013"
    s = f"{x:.{digits}f}"
    if s.startswith("-"):
        # "-0.00" would read as a negative effect
        s = s[1:] if float(s) == 0.0 else MINUS + s[1:]
    return s


def format_effect(y: float, measure: str, digits: int = 2) -> str:
    """An effect given on the analysis scale, printed on the natural scale."""
    if y is None or not math.isfinite(y):
        return "\u2013"
    if is_ratio(measure):
        v = math.exp(y)
        if v >= 100:
            return f"{v:.0f}"
        if v < 0.01:
            return f"{v:.3g}"
        return format_number(v, digits)
    return format_number(y, digits)


def format_interval(lo: float, hi: float, measure: str, digits: int = 2) -> str:
    """ "low to high" on the natural scale ("to" avoids clashing with decimal commas)."""
    return f"{format_effect(lo, measure, digits)} to {format_effect(hi, measure, digits)}"


def format_tick_value(v: float) -> str:
    """A natural-unit tick label: at most three significant digits, no trailing zeros."""
    if v >= 100:
        s = f"{v:.0f}"
    else:
        s = f"{v:.3g}"
        if "e" in s:
            s = f"{v:.6f}".rstrip("0").rstrip(".")
    return s


# --------------------------------------------------------------------------------------
# Ratio-axis ticks

_MAX_TICKS = 7
_MIN_TICKS = 3


def _ladder(base_values: tuple[float, ...], lo: float, hi: float) -> list[float]:
    """Values m * 10**e (m in base_values) whose logs lie within [lo, hi]."""
    out = []
    e_lo = math.floor(lo / math.log(10)) - 1
    e_hi = math.ceil(hi / math.log(10)) + 1
    for e in range(e_lo, e_hi + 1):
        for m in base_values:
            v = m * 10.0**e
            if lo - 1e-9 <= math.log(v) <= hi + 1e-9:
                out.append(v)
    return sorted(set(round(v, 12) for v in out))


def _doubling(lo: float, hi: float) -> list[float]:
    ks = range(math.ceil(lo / math.log(2) - 1e-9), math.floor(hi / math.log(2) + 1e-9) + 1)
    return [2.0**k for k in ks]


def _linear(lo: float, hi: float, nbins: int = 5) -> list[float]:
    from matplotlib.ticker import MaxNLocator

    a, b = math.exp(lo), math.exp(hi)
    vals = MaxNLocator(nbins=nbins, steps=[1, 2, 2.5, 5, 10]).tick_values(a, b)
    return [float(v) for v in vals if v > 0 and a - 1e-12 <= v <= b + 1e-12]


def ratio_ticks(lo: float, hi: float, max_ticks: int = _MAX_TICKS, fits=None) -> list[float]:
    """Natural-unit tick values for a log axis spanning ``[lo, hi]`` (log units).

    Tries, in order, the doubling ladder (…, 0.25, 0.5, 1, 2, 4, …), the 1-2-5 ladder,
    decades, and finally evenly spaced round values for a narrow range, taking the first
    that gives between three and seven ticks, whose labels do not run together (``fits``)
    and that has ticks on both sides of 1 when the axis reaches well beyond 1 on both
    sides.

    Parameters
    ----------
    lo, hi : float
        Axis limits on the log scale.
    max_ticks : int
    fits : callable, optional
        ``fits(values) -> bool``: do these tick labels fit side by side on the axis?

    Returns
    -------
    list of float
        Tick positions in natural units (take ``log`` to place them).
    """
    if not (math.isfinite(lo) and math.isfinite(hi)) or hi <= lo:
        return [1.0]
    span = hi - lo
    max_ticks = max(max_ticks, _MIN_TICKS)
    # the null is "well inside" when at least 8 % of the axis lies on each side of it
    both = lo < -0.08 * span and hi > 0.08 * span

    def good(c: list[float], n_min: int = _MIN_TICKS) -> bool:
        if not n_min <= len(c) <= max_ticks:
            return False
        if both and not (any(v < 1.0 for v in c) and any(v > 1.0 for v in c)):
            return False
        return fits is None or fits(c)

    candidates: list[list[float]] = []
    doubling = _doubling(lo, hi)
    if span <= math.log(64) and all(v >= 0.125 for v in doubling):
        candidates.append(doubling)
    candidates.append(_ladder((1.0, 2.0, 5.0), lo, hi))
    candidates.append(_ladder((1.0,), lo, hi))
    for c in candidates:
        if good(c):
            return c
    # thin a ladder that is too dense, keeping 1 (the null) when in range
    for c in candidates:
        for step in range(2, len(c) + 1):
            anchor = c.index(1.0) if 1.0 in c else 0
            thinned = [v for i, v in enumerate(c) if (i - anchor) % step == 0]
            if good(thinned):
                return thinned
            if good(thinned, 2):
                return thinned
    lin = _linear(lo, hi)
    for nb in (5, 4, 3, 2):
        lin = _linear(lo, hi, nb)
        if len(lin) >= 2 and (fits is None or fits(lin)):
            return lin
    decades = candidates[-1]
    return decades[:1] + decades[-1:] if len(decades) >= 2 else [math.exp((lo + hi) / 2)]


def tick_fit_check(lo: float, hi: float, axis_pt: float, font_pt: float, natural: bool):
    """A ``fits(values)`` test: adjacent tick labels keep a gap of at least one space.

    ``natural`` means the values are natural units placed at their logs (ratio axes).
    """

    def fits(values) -> bool:
        pos = [math.log(v) if natural else v for v in values]
        if natural:
            texts = [format_tick_value(v) for v in values]
        else:
            # matplotlib prints linear ticks with a common number of decimals ("−5.0")
            decimals = max((len(f"{v:.6g}".partition(".")[2]) for v in values), default=0)
            texts = [_plain(v, decimals) for v in values]
        widths = [text_width_pt(t, font_pt) for t in texts]
        for i in range(len(values) - 1):
            gap = (pos[i + 1] - pos[i]) / (hi - lo) * axis_pt
            if gap < (widths[i] + widths[i + 1]) / 2 + 0.6 * font_pt:
                return False
        return True

    return fits


def _plain(v: float, decimals: int = 0) -> str:
    s = f"{v:.{decimals}f}"
    return MINUS + s[1:] if s.startswith("-") else s


def set_effect_axis(
    ax: Axes,
    measure: str,
    lo: float,
    hi: float,
    which: str = "x",
    max_ticks: int = _MAX_TICKS,
    axis_pt: float | None = None,
    font_pt: float | None = None,
) -> list[float]:
    """Set limits and ticks of an effect axis; ratio measures get natural-unit labels.

    Parameters
    ----------
    ax : matplotlib.axes.Axes
    measure : str
    lo, hi : float
        Limits on the analysis scale.
    which : {"x", "y"}
    max_ticks : int
    axis_pt, font_pt : float, optional
        Length of the axis and size of its tick labels in points; when given, ticks are
        chosen so that their labels do not run together.

    Returns
    -------
    list of float
        Tick positions on the analysis scale.
    """
    from matplotlib.ticker import FixedLocator, FuncFormatter, MaxNLocator, NullLocator

    axis = ax.xaxis if which == "x" else ax.yaxis
    (ax.set_xlim if which == "x" else ax.set_ylim)(lo, hi)
    check = axis_pt is not None and font_pt is not None and hi > lo
    if is_ratio(measure):
        fits = tick_fit_check(lo, hi, axis_pt, font_pt, True) if check else None
        ticks = ratio_ticks(lo, hi, max_ticks, fits=fits)
        pos = [math.log(t) for t in ticks]
        axis.set_major_locator(FixedLocator(pos))
        axis.set_major_formatter(FuncFormatter(lambda v, _p: format_tick_value(math.exp(v))))
        axis.set_minor_locator(NullLocator())
        return pos
    nbins = min(6, max_ticks)
    while True:
        loc = MaxNLocator(nbins=nbins, steps=[1, 2, 2.5, 5, 10])
        vals = [float(t) for t in loc.tick_values(lo, hi) if lo <= t <= hi]
        if not check or nbins <= 2 or tick_fit_check(lo, hi, axis_pt, font_pt, False)(vals):
            break
        nbins -= 1
    axis.set_major_locator(loc)
    axis.set_minor_locator(NullLocator())
    return vals


# --------------------------------------------------------------------------------------
# Text measuring and fitting (no renderer needed)


def text_width_pt(text: str, size: float, weight: str = "normal") -> float:
    """Width of ``text`` in points when set in DejaVu Sans at ``size`` points."""
    if not text:
        return 0.0
    return _text_width_pt(str(text), float(size), weight)


@functools.lru_cache(maxsize=2048)  # bounded: the same names are measured on every redraw
def _text_width_pt(text: str, size: float, weight: str) -> float:
    from matplotlib.font_manager import FontProperties

    from .style import FONT_FAMILY

    fp = FontProperties(family=FONT_FAMILY, size=size, weight=weight)
    w, _h, _d = _TEXT_TO_PATH().get_text_width_height_descent(text, fp, ismath=False)
    return float(w)


_TTP = None


def _TEXT_TO_PATH():  # noqa: N802 - a cached singleton accessor
    global _TTP
    if _TTP is None:
        from matplotlib.textpath import TextToPath

        _TTP = TextToPath()
    return _TTP


def fit_label(text: str, max_width_pt: float, size: float, weight: str = "normal") -> str:
    """Shorten ``text`` with an ellipsis so it fits ``max_width_pt``.

    A trailing year ("Kestrel trial 2019") is kept and the middle is shortened, since the
    year is what tells two reports of one trial apart.
    """
    text = " ".join(str(text).split())
    if text_width_pt(text, size, weight) <= max_width_pt:
        return text
    tail = ""
    parts = text.rsplit(" ", 1)
    if len(parts) == 2 and len(parts[1]) == 4 and parts[1].isdigit():
        head, tail = parts[0], " " + parts[1]
    else:
        head = text
    lo, hi = 0, len(head)
    # binary search on the number of characters kept
    while lo < hi:
        mid = (lo + hi + 1) // 2
        cand = head[:mid].rstrip() + ELLIPSIS + tail
        if text_width_pt(cand, size, weight) <= max_width_pt:
            lo = mid
        else:
            hi = mid - 1
    if lo == 0:
        return (
            ELLIPSIS + tail
            if tail and text_width_pt(ELLIPSIS + tail, size) <= max_width_pt
            else (ELLIPSIS)
        )
    return head[:lo].rstrip() + ELLIPSIS + tail
