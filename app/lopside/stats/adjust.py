"""Estimates adjusted for small-study effects (sensitivity analyses, not corrections).

This module holds the regression-based adjustments and re-exports the others, so callers
can import every adjustment from one place:

* :func:`pet_peese` — PET, PEESE and conditional PET-PEESE (Stanley & Doucouliagos 2014);
* :func:`limit_meta_analysis` — limit meta-analysis (Rücker et al. 2011);
* :func:`trim_and_fill` — Duval & Tweedie 2000 (``adjust_trimfill``);
* :func:`selection_model` — Vevea & Hedges 1995 step-function model (``adjust_selection``).

Every function takes a :class:`~lopside.stats.data.StudyData` and returns a frozen result
or :class:`~lopside.stats.results.NotComputable`. Formulas: methods.md sections 4 and 5.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .adjust_selection import SelectionModelResult, selection_model
from .adjust_trimfill import FilledStudy, TrimFillResult, k0_statistic, trim_and_fill
from .adjust_wls import Coefficient, wls
from .data import StudyData
from .pooling import TAU2_METHODS, fixed_effect, random_effects
from .results import ConfidenceInterval, NotComputable, PooledEstimate

__all__ = [
    "Coefficient",
    "FilledStudy",
    "LimitMetaAnalysisResult",
    "PetPeeseResult",
    "SelectionModelResult",
    "TrimFillResult",
    "k0_statistic",
    "limit_meta_analysis",
    "pet_peese",
    "selection_model",
    "trim_and_fill",
]

# --------------------------------------------------------------------------------------
# PET-PEESE


@dataclass(frozen=True, slots=True)
class PetPeeseResult:
    """PET, PEESE and the conditional choice between them.

    Attributes
    ----------
    pet, peese : Coefficient
        Intercept b0 of y = b0 + b1·SE (PET) and y = b0 + b1·SE² (PEESE), WLS with
        weights 1/SE², multiplicative dispersion, t with k − 2 df.
    pet_slope, peese_slope : Coefficient
        The slopes b1 of the two fits.
    chosen : str
        "PET" or "PEESE": which intercept the conditional rule reports.
    estimate : Coefficient
        The chosen intercept (same object as ``pet`` or ``peese``).
    alpha, sided : float, str
        The level and sidedness of the PET test used by the rule.
    pet_test_pvalue : float
        p-value of PET's b0 = 0 under that sidedness.
    rule : str
        The rule in words, with the level and sidedness used.
    reason : str
        Why this intercept was chosen, in words.
    direction : str
        "positive" or "negative": direction of the fixed-effect pooled estimate, used
        for the one-sided test.
    """

    pet: Coefficient
    peese: Coefficient
    pet_slope: Coefficient
    peese_slope: Coefficient
    chosen: str
    estimate: Coefficient
    alpha: float
    sided: str
    pet_test_pvalue: float
    rule: str
    reason: str
    direction: str
    k: int
    confidence_level: float = 0.95
    note: str = ""


def pet_peese(
    data: StudyData,
    *,
    alpha: float = 0.10,
    sided: str = "two",
    confidence_level: float = 0.95,
) -> PetPeeseResult | NotComputable:
    """PET, PEESE and conditional PET-PEESE (Stanley & Doucouliagos 2014, RSM 5:60).

    Parameters
    ----------
    data : StudyData
    alpha : float
        Level of PET's test of b0 = 0 in the conditional rule.
    sided : {"two", "one"}
        "two": two-sided test at ``alpha`` (default, 0.10). "one": one-sided test in the
        direction of the fixed-effect pooled estimate (use with ``alpha=0.05`` for the
        one-sided 5 % version). Papers differ here; the result prints which was used.
    confidence_level : float
        For the intervals of the coefficients.

    Returns
    -------
    PetPeeseResult or NotComputable
        NotComputable with fewer than three studies or when the SEs do not vary.
    """
    from scipy.special import stdtr

    if sided not in ("two", "one"):
        raise ValueError("sided must be 'two' or 'one'")
    y = np.asarray(data.y, dtype=float)
    se = np.asarray(data.se, dtype=float)
    k = y.size
    if k < 3:
        return NotComputable("PET-PEESE needs at least three studies")
    w = 1.0 / se**2
    ones = np.ones(k)
    pet_fit = wls(
        y,
        np.column_stack([ones, se]),
        w,
        names=("intercept", "se"),
        scaling="estimated",
        confidence_level=confidence_level,
    )
    if isinstance(pet_fit, NotComputable):
        return NotComputable(f"PET cannot be fitted: {pet_fit.reason}")
    peese_fit = wls(
        y,
        np.column_stack([ones, se**2]),
        w,
        names=("intercept", "variance"),
        scaling="estimated",
        confidence_level=confidence_level,
    )
    if isinstance(peese_fit, NotComputable):
        return NotComputable(f"PEESE cannot be fitted: {peese_fit.reason}")
    pet, peese = pet_fit.coefficients[0], peese_fit.coefficients[0]

    fe = fixed_effect(y, se**2)
    direction = (
        "negative" if (not isinstance(fe, NotComputable) and fe.estimate < 0) else "positive"
    )
    if sided == "two":
        p_test = pet.pvalue
        rule = (
            f"PET's intercept is tested against zero, two-sided at {alpha:g}; if that test "
            f"rejects, PEESE's intercept is reported, otherwise PET's"
        )
    else:
        d = 1.0 if direction == "positive" else -1.0
        p_test = float(stdtr(pet.df, -d * pet.statistic))
        rule = (
            f"PET's intercept is tested against zero, one-sided at {alpha:g} in the "
            f"direction of the pooled effect ({direction}); if that test rejects, PEESE's "
            f"intercept is reported, otherwise PET's"
        )
    if p_test < alpha:
        chosen, est = "PEESE", peese
        reason = (
            f"PET's intercept differs from zero (p = {p_test:.3g} < {alpha:g}), so there is "
            f"taken to be a genuine effect and PEESE's intercept is reported"
        )
    else:
        chosen, est = "PET", pet
        reason = (
            f"PET's intercept does not differ from zero (p = {p_test:.3g} ≥ {alpha:g}), so "
            f"PET's intercept is reported"
        )
    note = ""
    if k < 10:
        note = (
            "fewer than ten studies: PET and PEESE are imprecise and can be badly biased "
            "with heterogeneity or few studies"
        )
    return PetPeeseResult(
        pet=pet,
        peese=peese,
        pet_slope=pet_fit.coefficients[1],
        peese_slope=peese_fit.coefficients[1],
        chosen=chosen,
        estimate=est,
        alpha=float(alpha),
        sided=sided,
        pet_test_pvalue=float(p_test),
        rule=rule,
        reason=reason,
        direction=direction,
        k=int(k),
        confidence_level=confidence_level,
        note=note,
    )


# --------------------------------------------------------------------------------------
# Limit meta-analysis


@dataclass(frozen=True, slots=True)
class LimitMetaAnalysisResult:
    """Limit meta-analysis (Rücker et al. 2011, Biostatistics 12:122).

    Attributes
    ----------
    estimate, se, ci, statistic, pvalue : float
        β_lim = β + τ·α with its SE (z-based; see ``se_method``).
    beta, alpha : Coefficient
        Slope β (effect) and intercept α (small-study effect) of the OLS of
        y/√(v + τ²) on 1/√(v + τ²), with the model's unit residual variance.
    tau2 : float
        τ² of the standard random-effects model (``tau2_method``), held fixed.
    shrunken : tuple of float
        y_i,lim = β_lim + √(τ²/(v_i + τ²))·(y_i − β_lim), one per study, for the figure.
    random : PooledEstimate
        The standard random-effects estimate for comparison.
    se_method : str
        How the SE of β_lim was obtained, in words.
    """

    estimate: float
    se: float
    ci: ConfidenceInterval
    statistic: float
    pvalue: float
    beta: Coefficient
    alpha: Coefficient
    tau2: float
    tau2_method: str
    shrunken: tuple[float, ...]
    random: PooledEstimate
    se_method: str
    k: int
    confidence_level: float = 0.95
    note: str = ""


LIMIT_SE_METHOD = (
    "Var(β + τα) = Var(β) + τ²Var(α) + 2τCov(α, β) from the regression covariance, with τ "
    "treated as known and the residual variance fixed at 1 as the model states; normal "
    "(z) interval. Ignores the uncertainty in τ², so the interval is approximate."
)


def limit_meta_analysis(
    data: StudyData,
    *,
    tau2_method: str = "REML",
    confidence_level: float = 0.95,
) -> LimitMetaAnalysisResult | NotComputable:
    """Limit meta-analysis: the random-effects estimate as within-study SEs shrink to 0.

    Model y_i = β + √(v_i + τ²)(ε_i + α), ε_i ~ N(0, 1) (Rücker et al. 2011). With τ²
    from the standard random-effects model, OLS of y_i/√(v_i + τ²) on 1/√(v_i + τ²)
    gives slope β and intercept α; β_lim = β + τα. With τ² = 0 this is the slope of the
    radial (Galbraith) regression, which equals PET's intercept.

    The residual heterogeneity statistic G² of the paper is not computed: its formula
    could not be confirmed from a source.

    Parameters
    ----------
    data : StudyData
    tau2_method : {"DL", "PM", "REML"}
    confidence_level : float

    Returns
    -------
    LimitMetaAnalysisResult or NotComputable
    """
    from scipy.special import ndtr, ndtri

    if tau2_method not in TAU2_METHODS:
        raise ValueError(f"unknown tau² method {tau2_method!r}; use one of {TAU2_METHODS}")
    y = np.asarray(data.y, dtype=float)
    se = np.asarray(data.se, dtype=float)
    v = se**2
    k = y.size
    if k < 3:
        return NotComputable("limit meta-analysis needs at least three studies")
    re = random_effects(y, v, method=tau2_method, confidence_level=confidence_level)
    if isinstance(re, NotComputable):
        return re
    tau2 = re.tau2
    tau = math.sqrt(tau2)
    s = np.sqrt(v + tau2)
    fit = wls(
        y / s,
        np.column_stack([np.ones(k), 1.0 / s]),
        np.ones(k),
        names=("alpha", "beta"),
        scaling="fixed",
        confidence_level=confidence_level,
    )
    if isinstance(fit, NotComputable):
        return NotComputable(
            "limit meta-analysis needs studies of differing precision: " + fit.reason
        )
    a_c, b_c = fit.coefficients
    # β + τα and Var(β) + τ²Var(α) + 2τCov(α, β) in centred form. With x = 1/s and
    # z = y/s (unit weights, scale 1) they equal τ z̄ + β(1 - τ x̄) and
    # τ²/k + (1 - τ x̄)²/Sxx. The uncentred sum cancels to zero (or below) when τ²
    # dwarfs the within-study variances, because 1/s is then nearly constant and the
    # covariance entries are huge with opposite signs; the centred terms cannot.
    x = 1.0 / s
    z = y / s
    xbar = float(x.mean())
    sxx = float(((x - xbar) ** 2).sum())
    lever = 1.0 - tau * xbar
    est = tau * float(z.mean()) + b_c.estimate * lever
    var = tau2 / k + lever * lever / sxx
    if not (math.isfinite(est) and math.isfinite(var) and var > 0):
        return NotComputable(
            "limit meta-analysis cannot be computed accurately for these data (the standard "
            "errors are too extreme; check the entries for typing or unit errors)"
        )
    se_lim = math.sqrt(var)
    crit = float(ndtri(0.5 + confidence_level / 2.0))
    stat = est / se_lim
    shrink = np.sqrt(tau2 / (v + tau2)) if tau2 > 0 else np.zeros(k)
    shrunken = est + shrink * (y - est)
    note = ""
    if k < 10:
        note = "fewer than ten studies: the limit estimate is imprecise (Rücker et al. 2011)"
    return LimitMetaAnalysisResult(
        estimate=float(est),
        se=float(se_lim),
        ci=ConfidenceInterval(est - crit * se_lim, est + crit * se_lim),
        statistic=float(stat),
        pvalue=float(2.0 * ndtr(-abs(stat))),
        beta=b_c,
        alpha=a_c,
        tau2=float(tau2),
        tau2_method=tau2_method,
        shrunken=tuple(float(x) for x in shrunken),
        random=re,
        se_method=LIMIT_SE_METHOD,
        k=int(k),
        confidence_level=confidence_level,
        note=note,
    )
