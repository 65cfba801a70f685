"""How strong would selection have to be? (Mathur & VanderWeele 2020, JRSS C 69:1091).

A study is *affirmative* when its two-sided p < 0.05 (z = y/SE) and its estimate lies on
the same side of the null as the uncorrected pooled estimate; every other study is
*non-affirmative*. Suppose affirmative results are η ≥ 1 times as likely to be published
as non-affirmative ones. Then the published non-affirmative studies stand for η times as
many, and the corrected pooled estimate weights them by η (methods.md section 11.3):

    fixed effect:    μ̂_η = Σ a_i w_i y_i / Σ a_i w_i,  w_i = 1/v_i,  a_i = 1 or η
                     Var(μ̂_η) = Σ a_i² w_i / (Σ a_i w_i)²,  normal (z) interval
    random effects:  the same with ω_i = 1/(v_i + τ̂²) in place of w_i, and a robust
                     (sandwich) variance:
                     Var_R = Σ W_i² e_i² / (1 − h_i) / (Σ W_i)²,  W_i = a_i ω_i,
                     e_i = y_i − μ̂_η, h_i = W_i / Σ W_i  (the small-sample "CR2" form,
                     which for one estimate per study is statsmodels' HC2), with a t
                     interval on Satterthwaite degrees of freedom computed under the
                     working variances v_i + τ̂².

Choices and what is recalled (from memory, not re-checked against the paper): the paper
uses robust variance estimation with a small-sample correction for the random-effects
version; we take the CR2 correction and Satterthwaite degrees of freedom (Tipton 2015,
Psychol Methods 20:375) as our reading of that. τ̂² is estimated once, from the
uncorrected random-effects model (the analysis' τ² estimator), and held fixed for every
η: the robust variance stays valid when the weights are not exactly inverse variances,
and a fixed τ̂² keeps the corrected estimate a weighted mean with known weights.

What is checked without the paper (tests/test_selection_first_principles.py): at η = 1
the corrected estimates are the uncorrected fixed- and random-effects ones; the robust
variance equals CR2 computed from its matrix formula (Bell & McCaffrey 2002) by explicit
matrices, and a three-study example worked by hand. What stays "from memory" is only that
the paper uses these choices (CR2, Satterthwaite, τ̂² held fixed).

S-value (the η at which the corrected estimate reaches the null): with A = Σ_aff W y and
N = Σ_non W y (recoded so the pooled side is positive), η* = −A/N when N < 0; when
N ≥ 0 even infinitely strong selection of this form cannot reach the null ("not
attainable"). The S-value for the interval is the smallest η ≥ 1 at which the interval
limit nearer the null reaches it (found on a log grid, then by root finding).

Worst case (η → ∞): the estimate from the non-affirmative studies alone.

All estimates are returned on the analysis scale with their original sign.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .data import StudyData
from .results import NotComputable
from .selection_two_groups import TwoGroups

#: the η values every analysis reports (the user may add one more)
DEFAULT_ETAS: tuple[float, ...] = (1.0, 2.0, 5.0, 10.0, 20.0, 50.0)
#: affirmative = two-sided p below this, on the pooled side (Mathur & VanderWeele 2020)
AFFIRMATIVE_ALPHA = 0.05
#: the S-value for the interval is searched up to this η
ETA_SEARCH_MAX = 1e6
#: points of the η curve kept for the figure
CURVE_POINTS = 48

FIXED_METHOD = "fixed effect, inverse-variance weights; normal (z) interval"
ROBUST_METHOD = (
    "random effects with τ² from the uncorrected model held fixed; robust (sandwich) "
    "variance with the small-sample CR2 correction and a t interval on Satterthwaite "
    "degrees of freedom"
)

MSG_NO_AFFIRMATIVE = (
    "no study is affirmative (significant on the side of the pooled estimate): there is "
    "nothing for this kind of selection to correct, and every η gives the uncorrected estimate"
)
MSG_ALL_AFFIRMATIVE = (
    "every study is affirmative: the worst case (non-affirmative studies alone) cannot be "
    "computed, and weighting by η changes nothing"
)
MSG_AT_NULL = "the pooled estimate is exactly at no effect: there is no effect to explain away"
MSG_NOT_ATTAINABLE = (
    "not attainable: even if only non-affirmative results were ever left unpublished, "
    "with any strength of selection, the corrected estimate stays on the side of an effect"
)
MSG_NOT_ATTAINABLE_CI = (
    "not attainable: even in the worst case the interval does not reach no effect"
)
MSG_CI_ALREADY = "the uncorrected interval already includes no effect (η = 1)"
MSG_ESTIMATE_ALREADY = "the uncorrected estimate is not on the side of an effect"


@dataclass(frozen=True, slots=True)
class CorrectedEstimate:
    """The pooled estimate corrected for selection of strength ``eta``."""

    eta: float
    estimate: float
    se: float
    ci_low: float | None
    ci_high: float | None
    df: float | None = None  # t degrees of freedom (random effects only)


@dataclass(frozen=True, slots=True)
class WorstCase:
    """Pooled estimate of the non-affirmative studies alone (η → ∞)."""

    estimate: float
    se: float | None
    ci_low: float | None
    ci_high: float | None
    k: int
    df: float | None = None
    reason: str = ""  # why the interval is missing, if it is


@dataclass(frozen=True, slots=True)
class SensitivityModel:
    """Corrected estimates under one pooling model ("fixed" or "random")."""

    model: str
    method: str
    tau2: float
    by_eta: tuple[CorrectedEstimate, ...]
    s_value: float | None
    s_value_reason: str
    s_value_ci: float | None
    s_value_ci_reason: str
    worst_case: WorstCase | NotComputable
    #: the corrected estimate on a log grid of η (for the figure): (eta, estimate, low, high)
    curve: tuple[tuple[float, float, float, float], ...] = ()

    def at(self, eta: float) -> CorrectedEstimate | None:
        for c in self.by_eta:
            if c.eta == eta:
                return c
        return None


@dataclass(frozen=True, slots=True)
class SelectionSensitivity:
    """Result of :func:`selection_sensitivity`.

    ``direction`` is +1 when the pooled estimate is above the null, −1 below (the side
    on which a result counts as affirmative); ``affirmative_rows`` are table rows
    (0-based). ``fixed`` and ``random`` hold the two versions.
    """

    direction: int
    direction_rule: str
    affirmative: int
    nonaffirmative: int
    affirmative_rows: tuple[int, ...]
    fixed: SensitivityModel | NotComputable
    random: SensitivityModel | NotComputable
    reason: str = ""  # whole-analysis caveat (no affirmative / all affirmative)
    confidence_level: float = 0.95


# --------------------------------------------------------------------------- cores


def _fe(y, w, a):
    """Fixed-effect corrected estimates for each row of ``a`` (n_eta x k)."""
    aw = a * w
    s = aw.sum(axis=1)
    est = (aw @ y) / s
    var = (a * aw).sum(axis=1) / s**2
    return est, np.sqrt(var)


def _robust(y, omega, a, phi):
    """Random-effects corrected estimates, CR2 robust SE and Satterthwaite df.

    ``a`` is n_eta x k (0 drops a study); ``phi`` the working variances v + τ².
    The degrees of freedom use closed forms of tr(CΣ) and tr(CΣCΣ) for
    Σ = (I − 1h')Φ(I − 1h')' so that the cost stays O(k) per η.
    """
    W = a * omega
    S = W.sum(axis=1, keepdims=True)
    h = W / S
    est = (W @ y) / S[:, 0]
    e = y[None, :] - est[:, None]
    one_minus_h = 1.0 - h
    with np.errstate(divide="ignore", invalid="ignore"):
        c = np.where(W > 0, W**2 / (one_minus_h * S**2), 0.0)
        var = (c * e**2).sum(axis=1)
        # Satterthwaite: Σ_ij = φ_i δ_ij − u_i − u_j + s, u = hφ, s = Σ h²φ
        u = h * phi[None, :]
        s = (h * u).sum(axis=1)
        c1 = c.sum(axis=1)
        cu = (c * u).sum(axis=1)
        cuu = (c * u * u).sum(axis=1)
        r_diag = s - 2.0 * u.T  # k x n_eta
        tr1 = (c * (phi[None, :] - 2.0 * u)).sum(axis=1) + s * c1
        tr2 = (
            (c**2 * phi[None, :] ** 2).sum(axis=1)
            + 2.0 * (c**2 * phi[None, :] * r_diag.T).sum(axis=1)
            + s**2 * c1**2
            + 2.0 * c1 * cuu
            - 4.0 * s * c1 * cu
            + 2.0 * cu**2
        )
        df = tr1**2 / tr2
    return est, np.sqrt(var), df


def satterthwaite_df_direct(y, omega, a_row, phi) -> float:
    """The same df by explicit k x k matrices (kept for the tests; O(k²))."""
    W = a_row * omega
    h = W / W.sum()
    k = y.size
    M = np.eye(k) - np.outer(np.ones(k), h)
    Sigma = M @ np.diag(phi) @ M.T
    C = np.diag(W**2 / ((1.0 - h) * W.sum() ** 2))
    CS = C @ Sigma
    return float(np.trace(CS) ** 2 / np.trace(CS @ CS))


# --------------------------------------------------------------------------- main


#: points of each grid of the search for the interval's S-value
SEARCH_POINTS = 41
_UNIT: dict[int, np.ndarray] = {}


def _geom(lo: float, hi: float, n: int) -> np.ndarray:
    """n points from ``lo`` to ``hi`` (both exact) evenly spaced on a log scale; the
    same points as numpy's geomspace up to rounding, without its overhead."""
    unit = _UNIT.get(n)
    if unit is None:
        unit = _UNIT.setdefault(n, np.linspace(0.0, 1.0, n))
    out = lo * np.exp(math.log(hi / lo) * unit)
    out[0], out[-1] = lo, hi
    return out


def _curve_top(s_value: float | None, s_ci: float | None) -> float:
    """How far the curve for the figure goes: far enough to show the S-values, at least
    to η = 100."""
    reach = [x for x in (s_value, s_ci) if x is not None]
    return min(ETA_SEARCH_MAX, max(100.0, 3.0 * max(reach, default=1.0)))


def _limits(est, se, crit):
    return est - crit * se, est + crit * se


def _model(
    name: str,
    yy: np.ndarray,
    w: np.ndarray,
    aff: np.ndarray,
    etas: tuple[float, ...],
    sign: int,
    confidence_level: float,
    phi: np.ndarray | None,
    tau2: float,
) -> SensitivityModel:
    from scipy.special import ndtri, stdtrit

    z = float(ndtri(0.5 + confidence_level / 2.0))
    q = 0.5 + confidence_level / 2.0
    robust = phi is not None
    k = yy.size
    n_aff = int(aff.sum())
    n_non = k - n_aff

    from .sensitivity import LARGE_K

    # many studies: the same formulas from sums over the two groups (see
    # selection_two_groups; equal to rounding, nothing left out)
    groups = TwoGroups(yy, w, aff, phi) if k > LARGE_K else None

    def with_crit(est, se, df):
        if robust:
            with np.errstate(invalid="ignore"):
                crit = np.where(np.isfinite(df) & (df > 0), stdtrit(df, q), np.nan)
            return est, se, df, crit
        return est, se, df, np.full(est.shape, z)

    def evaluate_a(a: np.ndarray):
        if robust:
            return with_crit(*_robust(yy, w, a, phi))
        est, se = _fe(yy, w, a)
        return with_crit(est, se, np.full(est.shape, np.nan))

    def weights_for(eta_arr: np.ndarray) -> np.ndarray:
        return np.where(aff[None, :], 1.0, eta_arr[:, None])

    def evaluate(eta_arr: np.ndarray):
        if groups is not None:
            return with_crit(*groups.evaluate(np.ones(eta_arr.size), eta_arr))
        return evaluate_a(weights_for(eta_arr))

    # One array evaluation for what every call needs: the reported η, the first grid of
    # the search for the interval's S-value, the curve for the figure (its reach guessed
    # from the closed-form S-value; redone below only if the interval's S-value reaches
    # further) and the worst case (a row that keeps only the non-affirmative studies).
    A = float(w[aff] @ yy[aff])
    N = float(w[~aff] @ yy[~aff])
    guess = -A / N if n_aff and n_non and N < 0 else None
    eta_arr = np.asarray(etas, dtype=float)
    search0 = _geom(1.0, ETA_SEARCH_MAX, SEARCH_POINTS)
    curve_top = _curve_top(guess, None)
    curve_grid = _geom(1.0, curve_top, CURVE_POINTS)
    first_etas = np.concatenate([eta_arr, search0, curve_grid])
    worst_row = n_non > 0 and (not robust or n_non >= 2)
    if groups is not None:
        # the rows as (α, β): α = 1, β = η; the worst case α = 0, β = 1
        alpha = np.ones(first_etas.size + worst_row)
        beta = np.concatenate([first_etas, [1.0]]) if worst_row else first_etas
        if worst_row:
            alpha[-1] = 0.0
        est_all, se_all, df_all, crit_all = with_crit(*groups.evaluate(alpha, beta))
    else:
        rows = [weights_for(first_etas)]
        if worst_row:
            rows.append((~aff).astype(float)[None, :])
        est_all, se_all, df_all, crit_all = evaluate_a(np.vstack(rows) if worst_row else rows[0])
    n_e, n_s = eta_arr.size, search0.size
    est, se, df, crit = (x[:n_e] for x in (est_all, se_all, df_all, crit_all))
    cut = slice(n_e + n_s, n_e + n_s + curve_grid.size)
    by_eta = _by_eta(etas, est, se, df, crit, sign, robust)

    # worst case: the non-affirmative studies alone (the last row above)
    last = (float(est_all[-1]), float(se_all[-1]), df_all[-1], crit_all[-1])
    worst = _worst_case(yy, w, aff, sign, robust, last)
    # S-value for the estimate: closed form
    s_value, s_reason = _s_value(n_aff, n_non, float(est[0]), A, N)

    # S-value for the interval: the limit nearer the null, searched on a log grid
    def near(e):
        e_, s_, _, c_ = evaluate(np.asarray(e, dtype=float))
        return e_ - c_ * s_

    first_grid = est_all[n_e : n_e + n_s] - crit_all[n_e : n_e + n_s] * se_all[n_e : n_e + n_s]
    first = float(est[0] - crit[0] * se[0])  # η = 1 is the first of ``etas``
    s_ci, ci_reason = _s_value_ci(n_aff, first, search0, first_grid, near)
    # the curve for the figure: far enough to show the S-values, at least to η = 100
    top = _curve_top(s_value, s_ci)
    if top == curve_top:
        grid, ce, cs, cc = curve_grid, est_all[cut], se_all[cut], crit_all[cut]
    else:
        grid = _geom(1.0, top, CURVE_POINTS)
        ce, cs, _, cc = evaluate(grid)
    return SensitivityModel(
        model=name,
        method=ROBUST_METHOD if robust else FIXED_METHOD,
        tau2=float(tau2),
        by_eta=by_eta,
        s_value=s_value,
        s_value_reason=s_reason,
        s_value_ci=s_ci,
        s_value_ci_reason=ci_reason,
        worst_case=worst,
        curve=_curve(grid, ce, cs, cc, sign),
    )


def _by_eta(etas, est, se, df, crit, sign: int, robust: bool) -> tuple[CorrectedEstimate, ...]:
    """The corrected estimate at each reported η, on the review's own side."""
    out = []
    for i, eta in enumerate(etas):
        lo, hi = _limits(est[i], se[i], crit[i])
        ok = math.isfinite(lo) and math.isfinite(hi)
        if sign < 0:
            lo, hi = -hi, -lo
        out.append(
            CorrectedEstimate(
                eta=float(eta),
                estimate=float(sign * est[i]),
                se=float(se[i]),
                ci_low=float(lo) if ok else None,
                ci_high=float(hi) if ok else None,
                df=float(df[i]) if robust and math.isfinite(df[i]) else None,
            )
        )
    return tuple(out)


def _curve(grid, ce, cs, cc, sign: int) -> tuple:
    """The figure's curve: (η, estimate, low, high) on the review's own side."""
    lo_c, hi_c = ce - cc * cs, ce + cc * cs
    if sign < 0:
        lo_c, hi_c = -hi_c, -lo_c
    return tuple(map(tuple, np.column_stack([grid, sign * ce, lo_c, hi_c]).tolist()))


def _worst_case(yy, w, aff, sign: int, robust: bool, last) -> WorstCase | NotComputable:
    """The estimate from the non-affirmative studies alone; ``last`` is the (estimate, SE,
    df, critical value) of that row of the model's one array evaluation."""
    n_non = int((~aff).sum())
    if n_non == 0:
        return NotComputable(MSG_ALL_AFFIRMATIVE)
    if robust and n_non < 2:
        wsum = w[~aff].sum()
        west = float((w[~aff] @ yy[~aff]) / wsum)
        return WorstCase(
            estimate=sign * west,
            se=None,
            ci_low=None,
            ci_high=None,
            k=n_non,
            reason="a robust interval needs at least two non-affirmative studies",
        )
    we, wse, wdf, wcrit = last
    lo, hi = _limits(we, wse, float(wcrit))
    if sign < 0:
        lo, hi = -hi, -lo
    if robust:
        return WorstCase(sign * we, wse, lo, hi, n_non, float(wdf))
    return WorstCase(sign * we, wse, lo, hi, n_non)


def _s_value(n_aff: int, n_non: int, est1: float, A: float, N: float):  # noqa: N803
    """(S-value, reason): the η at which the corrected estimate reaches the null, in
    closed form (-A/N), or None and why not."""
    if n_aff == 0:
        return None, MSG_NO_AFFIRMATIVE
    if est1 <= 0:
        return None, MSG_ESTIMATE_ALREADY
    if n_non == 0 or N >= 0:
        return None, MSG_NOT_ATTAINABLE
    return -A / N, ""


def _s_value_ci(n_aff: int, first: float, search0, first_grid, near):
    """(S-value, reason) for the interval: the η at which the limit nearer the null
    reaches it, bracketed on log grids (the first already evaluated), then interpolated
    linearly inside the last, very narrow bracket."""
    if n_aff == 0:
        return None, MSG_NO_AFFIRMATIVE
    if not math.isfinite(first):
        return None, "the interval cannot be computed at η = 1 for these studies"
    if first <= 0:
        return None, MSG_CI_ALREADY
    lo_eta, hi_eta = 1.0, ETA_SEARCH_MAX
    s_ci, ci_reason = None, MSG_NOT_ATTAINABLE_CI
    for rnd in range(5):
        if rnd == 0:  # the first grid was evaluated with the reported η
            grid, g = search0, first_grid
        else:
            grid = _geom(lo_eta, hi_eta, SEARCH_POINTS)
            g = near(grid)
        hit = np.flatnonzero(~(g > 0))
        if hit.size == 0 or hit[0] == 0:
            break
        j = int(hit[0])
        if not math.isfinite(g[j]):
            ci_reason = "the interval cannot be computed at large η"
            break
        lo_eta, hi_eta = float(grid[j - 1]), float(grid[j])
        g_lo, g_hi = float(g[j - 1]), float(g[j])
        s_ci = lo_eta + (hi_eta - lo_eta) * g_lo / (g_lo - g_hi)
        ci_reason = ""
    return s_ci, ci_reason


def affirmative_mask(y: np.ndarray, se: np.ndarray, sign: int) -> np.ndarray:
    """True where the two-sided p < 0.05 and the estimate is on the pooled side."""
    from scipy.special import ndtr

    p = 2.0 * ndtr(-np.abs(y / se))
    return (p < AFFIRMATIVE_ALPHA) & (sign * y > 0)


def selection_sensitivity(
    data: StudyData,
    *,
    pooled_estimate: float,
    tau2: float,
    etas: tuple[float, ...] = DEFAULT_ETAS,
    confidence_level: float = 0.95,
) -> SelectionSensitivity | NotComputable:
    """Corrected pooled estimates, S-values and worst case (Mathur & VanderWeele 2020).

    Parameters
    ----------
    data : StudyData
    pooled_estimate : float
        The uncorrected pooled estimate whose side defines "affirmative" (the analysis'
        main random-effects estimate).
    tau2 : float
        τ² of the uncorrected random-effects model, held fixed for every η.
    etas : tuple of float
        Selection ratios to report (each ≥ 1); 1 is always included first.
    """
    y = np.asarray(data.y, dtype=float)
    se = np.asarray(data.se, dtype=float)
    k = y.size
    if k < 2:
        return NotComputable("the sensitivity to selection needs at least two studies")
    if not math.isfinite(pooled_estimate) or not math.isfinite(tau2):
        return NotComputable("the uncorrected pooled estimate is not available")
    if pooled_estimate == 0.0:
        return NotComputable(MSG_AT_NULL)
    bad = [e for e in etas if not (math.isfinite(e) and e >= 1.0)]
    if bad:
        raise ValueError(f"η must be a number of at least 1, got {bad[0]!r}")
    etas = tuple(sorted({1.0, *(float(e) for e in etas)}))
    sign = 1 if pooled_estimate > 0 else -1
    rule = (
        "affirmative = two-sided p < 0.05 with an estimate "
        + ("above" if sign > 0 else "below")
        + " the null, the side of the pooled random-effects estimate"
    )
    aff = affirmative_mask(y, se, sign)
    yy = sign * y
    v = se**2
    tau2 = max(0.0, float(tau2))
    fixed = _model("fixed", yy, 1.0 / v, aff, etas, sign, confidence_level, None, 0.0)
    phi = v + tau2
    random = _model("random", yy, 1.0 / phi, aff, etas, sign, confidence_level, phi, tau2)
    n_aff = int(aff.sum())
    reason = ""
    if n_aff == 0:
        reason = MSG_NO_AFFIRMATIVE
    elif n_aff == k:
        reason = MSG_ALL_AFFIRMATIVE
    rows = data.rows if len(data.rows) == k else tuple(range(k))
    return SelectionSensitivity(
        direction=sign,
        direction_rule=rule,
        affirmative=n_aff,
        nonaffirmative=k - n_aff,
        affirmative_rows=tuple(int(rows[i]) for i in np.flatnonzero(aff)),
        fixed=fixed,
        random=random,
        reason=reason,
        confidence_level=confidence_level,
    )
