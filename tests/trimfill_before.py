"""Trim and fill as it was before the speed-ups of issue 16 (commit d6e8c31), kept so that
tests/test_trimfill_speed.py can compare the current code with it bit for bit. Not used
by the application.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from lopside.stats.adjust_wls import egger_slope
from lopside.stats.data import StudyData
from lopside.stats.pooling import TAU2_METHODS, fixed_effect, random_effects
from lopside.stats.pooling_base import TOO_EXTREME, _too_extreme
from lopside.stats.results import NotComputable, PooledEstimate

ESTIMATORS: tuple[str, ...] = ("L0", "R0")
SIDES: tuple[str, ...] = ("auto", "left", "right")
MODELS: tuple[str, ...] = ("FE", "RE")

CHOICES_TEXT = (
    "Defaults chosen by this tool: estimator L0, centre re-estimated by fixed effect while "
    "trimming, final estimate by random effects after filling. Other combinations are "
    "defensible and can give a different number of filled studies (Peters et al. 2007). "
    "Trim and fill is a sensitivity analysis, not a corrected estimate."
)


@dataclass(frozen=True, slots=True)
class FilledStudy:
    """A pseudo-study imputed by trim and fill: the mirror image of a trimmed study."""

    y: float
    se: float
    mirrored_from: str


@dataclass(frozen=True, slots=True)
class TrimFillResult:
    """Result of :func:`trim_and_fill`.

    Attributes
    ----------
    estimator : str
        "L0" or "R0".
    k0 : int
        Estimated number of missing studies (= number of pseudo-studies filled).
    side : str
        "left" or "right": where the missing studies are assumed to be.
    side_rule : str
        How the side was chosen, in words.
    filled : tuple of FilledStudy
        Pseudo-studies, y* = 2·centre − y_j with the SE of the trimmed study j.
    adjusted : PooledEstimate
        Pooled estimate of the observed plus filled studies under ``fill_model``.
    original : PooledEstimate
        Pooled estimate of the observed studies under the same model.
    centre : float
        Centre from the final trimming step (the mirror axis).
    iterations : int
        Number of times the centre was re-estimated.
    converged : bool
        False if k0 oscillated or the iteration cap was reached.
    k0_history : tuple of int
        The values of k0 visited, starting with 0 (nothing trimmed); the last is ``k0``.
    """

    estimator: str
    k0: int
    side: str
    side_rule: str
    filled: tuple[FilledStudy, ...]
    adjusted: PooledEstimate
    original: PooledEstimate
    trim_model: str
    fill_model: str
    tau2_method: str
    centre: float
    iterations: int
    converged: bool
    k0_history: tuple[int, ...]
    confidence_level: float = 0.95
    choices: str = CHOICES_TEXT
    note: str = ""


def _average_ranks(a: np.ndarray, tol: float) -> np.ndarray:
    """Ranks 1..n of ``a`` with average ranks for values within ``tol`` of each other."""
    n = a.size
    order = np.argsort(a, kind="mergesort")
    s = a[order]
    # runs of sorted values whose neighbours are within tol share the average rank
    # (a chain: each value is compared with the one before it)
    starts = np.concatenate(([0], np.flatnonzero(~(np.diff(s) <= tol)) + 1))
    ends = np.concatenate((starts[1:], [n])) - 1
    first = np.zeros(n, dtype=np.intp)
    first[starts] = 1
    run = np.cumsum(first) - 1
    ranks = np.empty(n)
    ranks[order] = 0.5 * (starts + ends)[run] + 1.0
    return ranks


def k0_statistic(x, estimator: str = "L0") -> tuple[float, int]:
    """Duval & Tweedie's L0 or R0 from deviations ``x`` = y − centre (missing on the left).

    Returns ``(raw, rounded)``: L0 = [4 T_n − n(n+1)]/(2n − 1) with T_n the sum of the
    ranks of |x| over positive x, rounded as max(0, ⌊L0 + ½⌋); or R0 = γ* − 1 with γ* the
    number of positive deviations ranked above every non-positive one (the rightmost run),
    rounded as max(0, R0). A deviation of exactly zero counts as non-positive.
    """
    x = np.asarray(x, dtype=float)
    n = x.size
    ax = np.abs(x)
    tol = 1e-9 * float(ax.max()) if n else 0.0
    ranks = _average_ranks(ax, tol)
    pos = x > tol
    if estimator == "L0":
        t_n = float(ranks[pos].sum())
        raw = (4.0 * t_n - n * (n + 1)) / (2.0 * n - 1.0)
        return raw, max(0, int(math.floor(raw + 0.5)))
    if estimator == "R0":
        nonpos = ~pos
        h = float(ranks[nonpos].max()) if nonpos.any() else 0.0
        gamma = int(np.count_nonzero(pos & (ranks > h)))
        raw = float(gamma - 1)
        return raw, max(0, gamma - 1)
    raise ValueError(f"unknown estimator {estimator!r}; use one of {ESTIMATORS}")


def _pool(y: np.ndarray, v: np.ndarray, model: str, tau2_method: str, level: float):
    if model == "FE":
        return fixed_effect(y, v, confidence_level=level)
    return random_effects(y, v, method=tau2_method, confidence_level=level)


def trim_and_fill(
    data: StudyData,
    *,
    estimator: str = "L0",
    side: str = "auto",
    trim_model: str = "FE",
    fill_model: str = "RE",
    tau2_method: str = "REML",
    max_iter: int = 100,
    confidence_level: float = 0.95,
) -> TrimFillResult | NotComputable:
    """Duval & Tweedie's trim and fill.

    Parameters
    ----------
    data : StudyData
    estimator : {"L0", "R0"}
        Estimator of the number of missing studies (methods.md section 4).
    side : {"auto", "left", "right"}
        Where studies are assumed missing. "auto": opposite to the lean of the small
        studies, from the sign of the Egger slope of y on SE (positive → left).
    trim_model, fill_model : {"FE", "RE"}
        Model for the centre while trimming, and for the final pooled estimate.
    tau2_method : {"DL", "PM", "REML"}
        tau² estimator wherever random effects are used.
    max_iter : int
        Cap on the trimming iterations; reaching it or cycling is reported.
    confidence_level : float

    Returns
    -------
    TrimFillResult or NotComputable
    """
    _check_options(estimator, side, trim_model, fill_model, tau2_method)
    y = np.asarray(data.y, dtype=float)
    se = np.asarray(data.se, dtype=float)
    n = y.size
    if n < 3:
        return NotComputable("trim and fill needs at least three studies")
    labels = data.labels if len(data.labels) == n else tuple(f"Study {i + 1}" for i in range(n))
    chosen = _choose_side(y, se, side)
    if isinstance(chosen, NotComputable):
        return chosen
    side_used, side_rule = chosen

    sign = 1.0 if side_used == "left" else -1.0
    yw = sign * y
    v = se**2
    # Trimming order: largest working estimate first; ties → larger SE first.
    trim_order = np.lexsort((-se, -yw))
    trimming = _trim(
        yw, v, trim_order, estimator, trim_model, tau2_method, max_iter, confidence_level
    )
    if isinstance(trimming, NotComputable):
        return trimming
    k0, centre, sequence, iterations, converged, note = trimming

    trimmed = trim_order[:k0]
    filled_w = 2.0 * centre - yw[trimmed]
    filled = tuple(
        FilledStudy(y=float(sign * fy), se=float(se[j]), mirrored_from=labels[j])
        for fy, j in zip(filled_w, trimmed)
    )
    y_all = np.concatenate([y, np.array([f.y for f in filled])])
    v_all = np.concatenate([v, np.array([f.se**2 for f in filled])])
    adjusted = _pool(y_all, v_all, fill_model, tau2_method, confidence_level)
    original = _pool(y, v, fill_model, tau2_method, confidence_level)
    if isinstance(adjusted, NotComputable):
        return adjusted
    if isinstance(original, NotComputable):
        return original
    return TrimFillResult(
        estimator=estimator,
        k0=int(k0),
        side=side_used,
        side_rule=side_rule,
        filled=filled,
        adjusted=adjusted,
        original=original,
        trim_model=trim_model,
        fill_model=fill_model,
        tau2_method=tau2_method,
        centre=float(sign * centre),
        iterations=int(iterations),
        converged=converged,
        k0_history=tuple(sequence),
        confidence_level=confidence_level,
        note=note,
    )


def _check_options(estimator, side, trim_model, fill_model, tau2_method) -> None:
    """Raise ValueError for an option trim and fill does not know."""
    if estimator not in ESTIMATORS:
        raise ValueError(f"unknown estimator {estimator!r}; use one of {ESTIMATORS}")
    if side not in SIDES:
        raise ValueError(f"unknown side {side!r}; use one of {SIDES}")
    if trim_model not in MODELS or fill_model not in MODELS:
        raise ValueError(f"models must be one of {MODELS}")
    if tau2_method not in TAU2_METHODS:
        raise ValueError(f"unknown tau² method {tau2_method!r}; use one of {TAU2_METHODS}")


def _choose_side(y: np.ndarray, se: np.ndarray, side: str) -> tuple[str, str] | NotComputable:
    """(the side studies are assumed missing on, the rule that chose it, in words)."""
    if side != "auto":
        return side, f"chosen by the user: studies assumed missing on the {side}"
    slope = egger_slope(y, se)
    if slope is None:
        return NotComputable(
            "all studies have the same standard error, so the side where studies might "
            "be missing cannot be judged automatically; choose the side yourself"
        )
    scale = float(np.abs(y).max()) or 1.0
    if abs(slope) <= 1e-12 * scale:
        return "left", (
            "automatic: the Egger slope of the estimates on their standard errors is "
            "zero, so small studies do not lean either way; left used by convention"
        )
    if slope > 0:
        return "left", (
            f"automatic: the Egger slope of the estimates on their standard errors is "
            f"positive ({slope:.3g}), i.e. smaller studies show larger estimates, so "
            f"studies are assumed missing on the left (smaller estimates)"
        )
    return "right", (
        f"automatic: the Egger slope of the estimates on their standard errors is "
        f"negative ({slope:.3g}), i.e. smaller studies show smaller estimates, so "
        f"studies are assumed missing on the right (larger estimates)"
    )


def _trim(yw, v, trim_order, estimator, trim_model, tau2_method, max_iter, level):
    """Trim the most extreme studies until the number missing settles (or cycles).

    Returns (k0, centre, k0 values visited, iterations, converged, note) on the working
    scale (missing studies on the left), or NotComputable when a centre cannot be pooled.
    """
    n = yw.size

    if trim_model == "FE" and _too_extreme(yw, v):
        return NotComputable(TOO_EXTREME)
    w = 1.0 / v

    def centre_without(k: int) -> float | NotComputable:
        keep = np.ones(n, dtype=bool)
        keep[trim_order[:k]] = False
        if trim_model == "FE":
            # the fixed-effect estimate as fixed_effect() computes it, without its CI and
            # weights; a subset of sums that are finite is finite (all terms are >= 0)
            wk = w[keep]
            return float((wk * yw[keep]).sum() / wk.sum())
        est = _pool(yw[keep], v[keep], trim_model, tau2_method, level)
        return est if isinstance(est, NotComputable) else est.estimate

    k0 = 0
    sequence = [0]  # k0 values visited, starting from no trimming
    converged = False
    note = ""
    iterations = 0
    while True:
        centre = centre_without(k0)
        if isinstance(centre, NotComputable):
            return centre
        iterations += 1
        _, new_k0 = k0_statistic(yw - centre, estimator)
        new_k0 = min(new_k0, n - 1)
        if new_k0 == k0:
            converged = True
            break
        if new_k0 in sequence:
            cycle = sequence[sequence.index(new_k0) :]
            note = (
                "the number of missing studies oscillated between "
                + ", ".join(str(x) for x in sorted(set(cycle)))
                + f"; the last value reached ({new_k0}) is shown"
            )
        elif iterations >= max_iter:
            note = f"the trimming did not settle within {max_iter} iterations; last value shown"
        sequence.append(new_k0)
        k0 = new_k0
        if note:
            centre = centre_without(k0)
            if isinstance(centre, NotComputable):
                return centre
            break
    return k0, centre, sequence, iterations, converged, note
