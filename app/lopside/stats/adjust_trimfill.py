"""Trim and fill (Duval & Tweedie 2000, Biometrics 56:455 and JASA 95:89).

Algorithm as in methods.md section 4. Working orientation: studies are assumed missing on
the *left*, so the *largest* estimates are trimmed; for missing studies on the right the
estimates are multiplied by -1, the same steps are run, and the results are flipped back.

Documented choices (this tool's defaults, not the only defensible ones — Peters et al.
2007, Stat Med 26:4544, compared the combinations and found that they can disagree):

* estimator L0 (R0 offered);
* the centre used while trimming is the fixed-effect estimate, the final estimate after
  filling is random effects (REML);
* side "auto": the side opposite to where small studies lean, judged by the sign of the
  Egger slope of y on SE (WLS, weights 1/SE²) — a positive slope means small studies show
  larger effects, so studies are taken to be missing on the left. This rule is ours, not
  Duval & Tweedie's; the user can override it;
* ranks of |y - centre| use average ranks for ties, with values equal to within 1e-9 of
  the largest deviation counted as tied (so that floating-point rounding does not split
  mirror-image pairs); among studies with equal estimates the one with the larger SE is
  trimmed first.

Trim and fill is a sensitivity analysis, not a corrected estimate: with heterogeneity it
can impute studies where no bias exists (Terrin et al. 2003; Peters et al. 2007).
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

import numpy as np

from .adjust_wls import egger_slope
from .data import StudyData
from .pooling import TAU2_METHODS, estimate_tau2, fixed_effect, random_effects
from .pooling_base import TOO_EXTREME, _too_extreme
from .results import NotComputable, PooledEstimate
from .tau2 import analysis_memo
from .trimfill_tau2 import reml_from

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


def _run_ranks(s: np.ndarray, tol: float) -> np.ndarray:
    """Ranks 1..n of the *sorted* values ``s``, averaged over values within ``tol``."""
    n = s.size
    # runs of sorted values whose neighbours are within tol share the average rank
    # (a chain: each value is compared with the one before it)
    new_run = ~(np.diff(s) <= tol)
    if new_run.all():  # no ties: the ranks 1..n (the same numbers as the general case)
        return np.arange(1.0, n + 1.0)
    starts = np.concatenate(([0], np.flatnonzero(new_run) + 1))
    ends = np.concatenate((starts[1:], [n])) - 1
    return np.repeat(0.5 * (starts + ends) + 1.0, ends - starts + 1)


def _average_ranks(a: np.ndarray, tol: float) -> np.ndarray:
    """Ranks 1..n of ``a`` with average ranks for values within ``tol`` of each other."""
    order = np.argsort(a, kind="mergesort")
    ranks = np.empty(a.size)
    ranks[order] = _run_ranks(a[order], tol)
    return ranks


def k0_statistic(x, estimator: str = "L0") -> tuple[float, int]:
    """Duval & Tweedie's L0 or R0 from deviations ``x`` = y − centre (missing on the left).

    Returns ``(raw, rounded)``: L0 = [4 T_n − n(n+1)]/(2n − 1) with T_n the sum of the
    ranks of |x| over positive x, rounded as max(0, ⌊L0 + ½⌋); or R0 = γ* − 1 with γ* the
    number of positive deviations ranked above every non-positive one (the rightmost run),
    rounded as max(0, R0). A deviation of exactly zero counts as non-positive.
    """
    if estimator not in ESTIMATORS:
        raise ValueError(f"unknown estimator {estimator!r}; use one of {ESTIMATORS}")
    return _k0_around(np.sort(np.asarray(x, dtype=float)), 0.0, estimator)


def _k0_around(ys: np.ndarray, centre: float, estimator: str) -> tuple[float, int]:
    """:func:`k0_statistic` of ``ys - centre`` for ascending ``ys``, without sorting again.

    Below the centre, |y − centre| = centre − y ascends in reverse order; from the centre
    up, y − centre ascends; a stable sort merges the two runs in one pass. Ranks depend
    only on the sorted values, so they are those of sorting |y − centre| afresh (the
    rank sums are sums of halves: exact in any order).
    """
    n = ys.size
    i = int(np.searchsorted(ys, centre, "left"))
    # |x| of the negative deviations (ascending), then the non-negative deviations
    ax = np.concatenate(((centre - ys[:i])[::-1], ys[i:] - centre))
    tol = 1e-9 * max(float(ax[i - 1]) if i else 0.0, float(ax[-1]) if i < n else 0.0)
    order = np.argsort(ax, kind="stable")
    s = ax[order]
    pos = (order >= i) & (s > tol)
    ranks = _run_ranks(s, tol)
    if estimator == "L0":
        t_n = float(ranks[pos].sum())
        raw = (4.0 * t_n - n * (n + 1)) / (2.0 * n - 1.0)
        return raw, max(0, int(math.floor(raw + 0.5)))
    nonpos = ~pos
    h = float(ranks[nonpos].max()) if nonpos.any() else 0.0
    gamma = int(np.count_nonzero(pos & (ranks > h)))
    return float(gamma - 1), max(0, gamma - 1)


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

    from .sensitivity import LARGE_K

    # above LARGE_K studies the REML tau² of each subset starts from a neighbouring one
    warm = n > LARGE_K and tau2_method == "REML"
    sign = 1.0 if side_used == "left" else -1.0
    yw = sign * y
    v = se**2
    # the trimming does not depend on the fill model: within one analysis, the settings
    # that differ only in it (trim FE, fill FE or RE) trim once
    memo = analysis_memo()
    key = ("trim and fill: trimming", estimator, trim_model, tau2_method, max_iter)
    key += (confidence_level, warm, sign, y.tobytes(), se.tobytes())
    found = memo.get(key) if memo is not None else None
    if found is None:
        trim_order = _trim_order(yw, se)
        trimming = _trim(
            yw,
            v,
            trim_order,
            estimator,
            trim_model,
            tau2_method,
            max_iter,
            confidence_level,
            y=y,
            warm=warm and trim_model == "RE",
        )
        found = (trim_order, trimming)
        if memo is not None:
            memo[key] = found
    trim_order, trimming = found
    if isinstance(trimming, NotComputable):
        return trimming
    k0, centre, sequence, iterations, converged, note = trimming

    trimmed = trim_order[:k0]
    filled_y = sign * (2.0 * centre - yw[trimmed])
    filled_se = se[trimmed].tolist()
    filled = tuple(
        map(FilledStudy, filled_y.tolist(), filled_se, [labels[j] for j in trimmed.tolist()])
    )
    y_all = np.concatenate([y, filled_y])
    v_all = np.concatenate([v, np.array([s**2 for s in filled_se], dtype=float)])
    original = _pool(y, v, fill_model, tau2_method, confidence_level)
    warm_fill = warm and fill_model == "RE" and k0 > 0 and not isinstance(original, NotComputable)
    if warm_fill:
        adjusted = _pool_re_from(y_all, v_all, original.tau2, confidence_level)
    else:
        adjusted = _pool(y_all, v_all, fill_model, tau2_method, confidence_level)
    if isinstance(adjusted, NotComputable):
        return adjusted
    if isinstance(original, NotComputable):
        return original
    if warm:
        large = trim_fill_large_note(n, trim_model == "RE" and iterations > 1, warm_fill)
        note = "; ".join(x for x in (note, large) if x)
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


def trim_fill_large_note(k: int, trimming: bool, filling: bool) -> str:
    """What trim and fill did another way for a review of ``k`` studies ("" if nothing).

    One wording whichever part was done this way (trimming, filling or both), so that
    the analysis' six settings give one note."""
    from .sensitivity import LARGE_K

    if not (trimming or filling):
        return ""
    return (
        f"With {k:,} studies (more than {LARGE_K:,}), trim and fill found the between-study "
        "variance (REML) by Newton steps: while trimming, from the previous step's value, "
        "without the search for a second maximum on a grid; after filling, from the "
        "all-study value, then checked on the usual grid. The variances agree with the "
        "usual fit to about 1e-9, the estimates to within 1e-7 of their standard error."
    )


def trim_fill_fit_notes(results) -> tuple[str, ...]:
    """The large-review notes (:func:`trim_fill_large_note`) of these trim-and-fill
    results, each once, in order ("" parts and other notes left out)."""
    import re

    found: list[str] = []
    for r in results:
        m = re.search(r"With [\d,]+ studies \(more than [\d,]+\), .*$", getattr(r, "note", ""))
        if m and m.group(0) not in found:
            found.append(m.group(0))
    return tuple(found)


def _pool_re_from(y, v, start, level):
    """Random effects (REML) with tau² by scoring from ``start`` and the grid safeguard."""
    t2 = reml_from(y, v, start, grid=True)
    est = random_effects(y, v, method="REML", tau2=t2.tau2, confidence_level=level)
    if isinstance(est, NotComputable):
        return est
    return dataclasses.replace(est, converged=t2.converged, note=t2.note)


def _trim_order(yw: np.ndarray, se: np.ndarray) -> np.ndarray:
    """Trimming order: largest working estimate first; ties → larger SE first, then the
    order of entry (``np.lexsort((-se, -yw))``, which sorts twice: only needed for ties)."""
    order = np.argsort(-yw, kind="stable")
    if (np.diff(yw[order]) == 0.0).any():
        return np.lexsort((-se, -yw))
    return order


def _trim(
    yw, v, trim_order, estimator, trim_model, tau2_method, max_iter, level, *, y=None, warm=False
):
    """Trim the most extreme studies until the number missing settles (or cycles).

    ``yw`` are the estimates on the working scale, ``y`` as entered (``yw`` or ``-yw``;
    default ``yw``): tau² does not depend on the sign, and asked of ``y`` it is the one the
    analysis has already estimated for all studies (:func:`pooling.reuse_tau2`). With
    ``warm`` (a large review, REML) each subset's tau² is found from the previous one.
    ``level`` is not used (a centre needs no interval).

    Returns (k0, centre, k0 values visited, iterations, converged, note) on the working
    scale (missing studies on the left), or NotComputable when a centre cannot be pooled.
    """
    n = yw.size
    y = yw if y is None else y
    # every centre pools a subset of these studies: sums of finite terms >= 0 are finite
    if _too_extreme(yw, v):
        return NotComputable(TOO_EXTREME)
    ys = np.ascontiguousarray(yw[trim_order][::-1])  # ascending
    w = 1.0 / v
    last_tau2: list[float] = []

    def centre_without(k: int) -> float:
        keep = np.ones(n, dtype=bool)
        keep[trim_order[:k]] = False
        if trim_model == "FE":
            # the fixed-effect estimate as fixed_effect() computes it, without its CI and
            # weights
            wk = w[keep]
            return float((wk * yw[keep]).sum() / wk.sum())
        # the random-effects estimate as random_effects() computes it
        vk = v[keep]
        if warm and last_tau2 and k > 0:
            t2 = reml_from(y[keep], vk, last_tau2[-1], grid=False).tau2
        else:
            t2 = estimate_tau2(y[keep], vk, tau2_method).tau2
        last_tau2.append(t2)
        wk = 1.0 / (vk + t2)
        return float((wk * yw[keep]).sum() / wk.sum())

    k0 = 0
    sequence = [0]  # k0 values visited, starting from no trimming
    converged = False
    note = ""
    iterations = 0
    while True:
        centre = centre_without(k0)
        iterations += 1
        new_k0 = min(_k0_around(ys, centre, estimator)[1], n - 1)
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
            break
    return k0, centre, sequence, iterations, converged, note
