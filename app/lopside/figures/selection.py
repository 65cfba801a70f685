"""How strong would selection have to be? The corrected estimate against η.

η (log axis) is how many times more likely a result significant in favour of the effect is
to be published than any other result (Mathur & VanderWeele 2020). The line is the
corrected pooled estimate, the band its interval, the dotted line the worst case (the
studies not significant in its favour, alone) that the curve approaches; the η at which
the estimate (filled marker) and its interval (hollow marker) reach no effect are marked
on the null line. Nothing here computes a statistic: every point comes from the analysis
result (``SensitivityModel.curve``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from . import style
from .common import FigureInputError, format_effect, set_effect_axis

if TYPE_CHECKING:  # pragma: no cover
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

X_LABEL = "η: times more likely a result significant in favour\nis to be published (log spacing)"


@dataclass(frozen=True, slots=True, eq=False)
class SelectionCurveInput:
    """Points of the curve (analysis scale) and the marks."""

    measure: str
    eta: Any
    estimate: Any
    low: Any
    high: Any
    s_value: float | None = None
    s_value_ci: float | None = None
    worst: float | None = None
    model_label: str = "random effects"


def selection_curve_input_from_result(result: Any) -> SelectionCurveInput | None:
    """The random-effects curve of the analysis (fixed effect if that is all there is)."""
    ss = getattr(result, "selection_sensitivity", None)
    if not ss:
        return None
    for name in ("random", "fixed"):
        model = getattr(ss, name)
        if model and model.curve:
            c = np.array(model.curve, dtype=float)
            wc = model.worst_case
            return SelectionCurveInput(
                measure=result.measure,
                eta=c[:, 0],
                estimate=c[:, 1],
                low=c[:, 2],
                high=c[:, 3],
                s_value=model.s_value,
                s_value_ci=model.s_value_ci,
                worst=wc.estimate if wc else None,
                model_label="random effects" if name == "random" else "fixed effect",
            )
    return None


def _eta_tick(v: float, _pos=None) -> str:
    return f"{v:,.0f}" if v >= 1 else f"{v:g}"


def draw_selection_curve(ax: Axes, inp: SelectionCurveInput, *, size: str = "column") -> dict:
    """Draw the curve on ``ax``; return the artists ("line", "band", "null", "worst",
    "s_value", "s_value_ci")."""
    from matplotlib.ticker import FixedLocator, FuncFormatter, NullLocator

    eta = np.asarray(inp.eta, dtype=float)
    est = np.asarray(inp.estimate, dtype=float)
    lo = np.asarray(inp.low, dtype=float)
    hi = np.asarray(inp.high, dtype=float)
    if eta.size < 2 or not np.all(np.isfinite(eta) & np.isfinite(est)):
        raise FigureInputError("the selection curve needs at least two finite points")
    preset = style.size_preset(size)
    art: dict[str, Any] = {"band": None, "worst": None, "s_value": None, "s_value_ci": None}
    with style.style_context(preset.font):
        band_ok = np.isfinite(lo) & np.isfinite(hi)
        if band_ok.any():
            art["band"] = ax.fill_between(
                eta[band_ok], lo[band_ok], hi[band_ok], color=style.BAND_RAMP[1], lw=0, zorder=1
            )
        art["null"] = ax.axhline(0.0, color=style.NULL_LINE, lw=style.LINE_WIDTH["null"], zorder=2)
        # a worst case just below the null line: the two labels go on the outer sides of
        # their lines, so that they do not meet between them (elsewhere "no effect" sits
        # under the null line and the worst case's label above its line)
        worst_below = False
        if inp.worst is not None and math.isfinite(inp.worst) and inp.worst < 0.0:
            seen = np.concatenate([est, lo[band_ok], hi[band_ok], [0.0, inp.worst]])
            seen = seen[np.isfinite(seen)]
            span = float(seen.max() - seen.min()) if seen.size else 0.0
            worst_below = -inp.worst < 0.2 * span
        ax.annotate(
            "no effect",
            (eta[-1], 0.0),
            xytext=(-2, 3 if worst_below else -3),
            textcoords="offset points",
            ha="right",
            va="bottom" if worst_below else "top",
            color=style.MUTED,
            fontsize=preset.font * 0.85,
        )
        (art["line"],) = ax.plot(
            eta, est, color=style.RANDOM, lw=style.LINE_WIDTH["pooled"], zorder=3
        )
        ys = [est, [0.0]]
        if band_ok.any():
            ys += [lo[band_ok], hi[band_ok]]
        if inp.worst is not None and math.isfinite(inp.worst):
            art["worst"] = ax.axhline(
                inp.worst,
                color=style.INK,
                lw=style.LINE_WIDTH["ci"],
                ls=style.LINE_STYLE["adjusted"],
                zorder=2,
            )
            ax.annotate(
                f"worst case {format_effect(inp.worst, inp.measure)}",
                (eta[-1], inp.worst),
                xytext=(-2, -3 if worst_below else 3),
                textcoords="offset points",
                ha="right",
                va="top" if worst_below else "bottom",
                color=style.INK,
                fontsize=preset.font * 0.85,
            )
            ys.append([inp.worst])
        for key, value, filled, words in (
            ("s_value", inp.s_value, True, "estimate"),
            ("s_value_ci", inp.s_value_ci, False, "interval"),
        ):
            if value is None or not (eta[0] <= value <= eta[-1]):
                continue
            (art[key],) = ax.plot(
                [value],
                [0.0],
                marker="o",
                ms=5,
                mfc=style.RANDOM if filled else style.PAPER,
                mec=style.RANDOM,
                mew=1.2,
                ls="none",
                zorder=4,
            )
            ax.annotate(
                f"{words}: η = {value:,.1f}" if value < 10 else f"{words}: η = {value:,.0f}",
                (value, 0.0),
                xytext=(0, -10 if filled else 6),
                textcoords="offset points",
                ha="center",
                va="top" if filled else "bottom",
                color=style.INK,
                fontsize=preset.font * 0.85,
            )
        ax.set_xscale("log")
        ax.set_xlim(eta[0], eta[-1])
        ticks = [t for t in (1, 2, 5, 10, 20, 50, 100, 200, 500, 1000, 10_000, 100_000, 1e6)
                 if eta[0] <= t <= eta[-1] * 1.0001]  # fmt: skip
        ax.xaxis.set_major_locator(FixedLocator(ticks))
        ax.xaxis.set_major_formatter(FuncFormatter(_eta_tick))
        ax.xaxis.set_minor_locator(NullLocator())
        y_all = np.concatenate([np.asarray(v, dtype=float).ravel() for v in ys])
        y_lo, y_hi = float(np.min(y_all)), float(np.max(y_all))
        pad = 0.08 * max(y_hi - y_lo, 1e-6)
        set_effect_axis(ax, inp.measure, y_lo - pad, y_hi + pad, which="y")
        ax.set_xlabel(X_LABEL)
        ax.set_ylabel(f"Corrected {inp.measure}")
    return art


def selection_curve_figure(inp: SelectionCurveInput, size: str = "column") -> Figure:
    """A stand-alone Figure of the curve (for the sheet and export)."""
    from matplotlib.figure import Figure

    preset = style.size_preset(size)
    with style.style_context(preset.font):
        fig = Figure(figsize=(preset.width, preset.width * 0.62), layout="constrained")
        ax = fig.add_subplot()
        draw_selection_curve(ax, inp, size=size)
    return fig
