"""Subgroup analyses and meta-regression: can a study feature explain the funnel's lean?

Small studies often differ from large ones in more than size — poorer methods (risk of
bias), other settings, other doses. These functions let the appraiser see whether the
small-study effect persists within subgroups, and whether the slope on the standard
error survives when a moderator is in the model.

Choices, stated once:

* Subgroup differences are tested twice: a fixed-effect Q_between (Q_total − Σ Q_within,
  χ² on G − 1 df) and a random-effects version with a separate τ² per subgroup
  (Q between the subgroup random-effects estimates weighted by 1/SE², χ² on G − 1 df)
  (Borenstein et al. 2009, Introduction to Meta-Analysis, ch. 19; Cochrane Handbook 5.1
  §9.6.3.1 — from memory).
* Egger-type regression within a subgroup: WLS of y on SE with weights 1/SE² and
  multiplicative dispersion, t on k − 2 df; the slope on SE is Egger's bias coefficient
  (methods.md 3.1, formulation B).
* Meta-regression: residual τ² by the method of moments (methods.md 3.7), weights
  1/(v + τ²), and by default the modified Knapp-Hartung t test (residual scale floored
  at 1, t on k − p df; Knapp & Hartung 2003), the same rule as the pooled HKSJ interval.
  ``test="z"`` gives Wald z tests instead.
* Studies with no entry for the grouping field form their own level, "not recorded".
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .adjust_wls import Coefficient, WLSFit, wls
from .data import StudyData
from .pooling import TAU2_METHODS, cochran_q, fixed_effect, random_effects
from .results import ConfidenceInterval, NotComputable, PooledEstimate

GROUPINGS: dict[str, str] = {"risk_of_bias": "risk-of-bias", "subgroup": "subgroup"}
NOT_RECORDED = "not recorded"
_ROB_ORDER = ("low", "some concerns", "high")
TESTS: tuple[str, ...] = ("knapp-hartung", "z")


@dataclass(frozen=True, slots=True)
class EggerRegression:
    """Egger's bias coefficient within a group (slope of y on SE, weights 1/SE²)."""

    bias: float
    se: float
    ci: ConfidenceInterval
    statistic: float
    pvalue: float
    df: float
    k: int
    confidence_level: float = 0.95


@dataclass(frozen=True, slots=True)
class SubgroupLevel:
    """Pooled results within one level of the grouping field.

    ``i2`` is in percent; NotComputable with a single study. ``egger`` needs three or
    more studies with differing SEs.
    """

    level: str
    k: int
    indices: tuple[int, ...]
    fixed: PooledEstimate
    random: PooledEstimate
    tau2: float
    i2: float | NotComputable
    egger: EggerRegression | NotComputable


@dataclass(frozen=True, slots=True)
class SubgroupDifferenceTest:
    """Test that the subgroup means are equal (χ² on ``df``)."""

    model: str
    statistic: float
    df: int
    pvalue: float
    description: str


@dataclass(frozen=True, slots=True)
class SubgroupAnalysis:
    by: str
    levels: tuple[SubgroupLevel, ...]
    fixed_test: SubgroupDifferenceTest | NotComputable
    random_test: SubgroupDifferenceTest | NotComputable
    tau2_method: str
    confidence_level: float = 0.95
    note: str = ""


def _egger(y: np.ndarray, se: np.ndarray, level: float) -> EggerRegression | NotComputable:
    k = y.size
    if k < 3:
        return NotComputable("Egger's regression needs at least three studies")
    if np.ptp(se) <= 1e-12 * float(se.max()):
        return NotComputable("Egger's regression needs studies of differing precision")
    fit = wls(
        y,
        np.column_stack([np.ones(k), se]),
        1.0 / se**2,
        names=("intercept", "se"),
        scaling="estimated",
        confidence_level=level,
    )
    if isinstance(fit, NotComputable):
        return fit
    c = fit.coefficients[1]
    return EggerRegression(
        bias=c.estimate,
        se=c.se,
        ci=c.ci,
        statistic=c.statistic,
        pvalue=c.pvalue,
        df=float(c.df),
        k=int(k),
        confidence_level=level,
    )


def _labels_for(data: StudyData, by: str) -> tuple[str, ...] | NotComputable:
    if by not in GROUPINGS:
        raise ValueError(f"unknown grouping {by!r}; use one of {tuple(GROUPINGS)}")
    raw = getattr(data, by)
    if len(raw) != data.k or all(not str(x).strip() for x in raw):
        return NotComputable(
            f"no study has a {GROUPINGS[by]} entry; fill in the {by} column to group studies"
        )
    return tuple(map(str.strip, map(str, raw)))


def _level_order(labels: tuple[str, ...], by: str) -> list[str]:
    seen: list[str] = []
    for lab in labels:
        name = lab if lab else NOT_RECORDED
        if name not in seen:
            seen.append(name)
    if by == "risk_of_bias":
        rank = {name: i for i, name in enumerate(_ROB_ORDER)}
        seen.sort(key=lambda s: (s == NOT_RECORDED, rank.get(s.lower(), len(rank))))
    else:
        seen.sort(key=lambda s: s == NOT_RECORDED)  # stable: first appearance otherwise
    return seen


def subgroup_analysis(
    data: StudyData,
    by: str = "risk_of_bias",
    *,
    tau2_method: str = "REML",
    confidence_level: float = 0.95,
) -> SubgroupAnalysis | NotComputable:
    """Pooled estimates, heterogeneity and Egger's regression within each level.

    Parameters
    ----------
    data : StudyData
    by : {"risk_of_bias", "subgroup"}
        Grouping field.
    tau2_method : {"DL", "PM", "REML"}
        τ² estimator, applied separately within each level.
    confidence_level : float

    Returns
    -------
    SubgroupAnalysis or NotComputable
        The difference tests are NotComputable when there is only one level.
    """
    from scipy.special import chdtrc

    if tau2_method not in TAU2_METHODS:
        raise ValueError(f"unknown tau² method {tau2_method!r}; use one of {TAU2_METHODS}")
    labels = _labels_for(data, by)
    if isinstance(labels, NotComputable):
        return labels
    y = np.asarray(data.y, dtype=float)
    se = np.asarray(data.se, dtype=float)
    v = se**2
    names = np.array([lab if lab else NOT_RECORDED for lab in labels], dtype=object)
    levels = []
    for name in _level_order(labels, by):
        idx = np.flatnonzero(names == name)
        yi, vi = y[idx], v[idx]
        fe = fixed_effect(yi, vi, confidence_level=confidence_level)
        re = random_effects(yi, vi, method=tau2_method, confidence_level=confidence_level)
        if idx.size >= 2:
            q = cochran_q(yi, vi)
            i2: float | NotComputable = max(0.0, (q - (idx.size - 1)) / q) * 100 if q > 0 else 0.0
        else:
            i2 = NotComputable("I² needs at least two studies")
        levels.append(
            SubgroupLevel(
                level=name,
                k=int(idx.size),
                indices=tuple(idx.tolist()),
                fixed=fe,
                random=re,
                tau2=re.tau2,
                i2=i2,
                egger=_egger(yi, se[idx], confidence_level),
            )
        )
    g = len(levels)
    if g < 2:
        one = NotComputable(
            f"all studies share one {GROUPINGS[by]} level, so there is nothing to compare"
        )
        fixed_test: SubgroupDifferenceTest | NotComputable = one
        random_test: SubgroupDifferenceTest | NotComputable = one
    else:
        q_within = sum(cochran_q(y[list(lv.indices)], v[list(lv.indices)]) for lv in levels)
        qb = max(0.0, cochran_q(y, v) - q_within)
        fixed_test = SubgroupDifferenceTest(
            model="fixed",
            statistic=float(qb),
            df=g - 1,
            pvalue=float(chdtrc(g - 1, qb)),
            description=(
                "fixed-effect Q between subgroups (total Q minus the sum of the "
                "within-subgroup Q), χ² on (number of subgroups − 1) df"
            ),
        )
        th = np.array([lv.random.estimate for lv in levels])
        vg = np.array([lv.random.se**2 for lv in levels])
        qr = cochran_q(th, vg)
        random_test = SubgroupDifferenceTest(
            model="random",
            statistic=float(qr),
            df=g - 1,
            pvalue=float(chdtrc(g - 1, qr)),
            description=(
                "random-effects Q between the subgroup estimates, each subgroup with its own "
                f"τ² ({tau2_method}), weighted by 1/SE², χ² on (number of subgroups − 1) df"
            ),
        )
    note = ""
    if any(lv.level == NOT_RECORDED for lv in levels):
        note = f"studies without a {GROUPINGS[by]} entry are grouped as '{NOT_RECORDED}'"
    return SubgroupAnalysis(
        by=by,
        levels=tuple(levels),
        fixed_test=fixed_test,
        random_test=random_test,
        tau2_method=tau2_method,
        confidence_level=confidence_level,
        note=note,
    )


# --------------------------------------------------------------------------------------
# Meta-regression


@dataclass(frozen=True, slots=True)
class ModeratorTest:
    """Joint test that all moderator coefficients are zero.

    Wald χ² on ``df`` with z tests; F on (``df``, ``df_denominator``) with Knapp-Hartung.
    """

    statistic: float
    df: int
    df_denominator: int | None
    pvalue: float
    distribution: str


@dataclass(frozen=True, slots=True)
class MetaRegressionResult:
    """Random-effects meta-regression.

    Attributes
    ----------
    coefficients : tuple of Coefficient
        "intercept", the moderator terms, and "se" when ``with_se``.
    tau2 : float
        Residual τ² (method of moments).
    test : str
        "knapp-hartung" (t on ``df`` df, scale floored at 1) or "z".
    moderator_test : ModeratorTest
        Joint test of the moderator terms.
    q_residual, q_residual_df, q_residual_pvalue
        Residual heterogeneity (weights 1/v), χ² on k − p df.
    se_without, se_with : Coefficient or NotComputable or None
        Slope on SE in the model with SE only, and with SE plus the moderator
        (None when ``with_se`` is False).
    se_answer : str
        Plain answer to "does the SE slope persist with the moderator in the model?".
    """

    coefficients: tuple[Coefficient, ...]
    tau2: float
    tau2_method: str
    test: str
    df: int | None
    k: int
    moderator: str
    reference_level: str | None
    moderator_test: ModeratorTest
    q_residual: float
    q_residual_df: int
    q_residual_pvalue: float
    se_without: Coefficient | NotComputable | None
    se_with: Coefficient | None
    se_answer: str
    confidence_level: float = 0.95
    note: str = ""


def tau2_moments(y, v, X) -> float:
    """Method-of-moments residual τ² for a meta-regression (methods.md 3.7).

    τ² = max{0, (Q_res − (k − p)) / tr(P)}, P = W − W X (X'WX)⁻¹ X'W, W = diag(1/v).
    With X a single column of ones this is the DerSimonian-Laird estimator.
    """
    y = np.asarray(y, dtype=float)
    v = np.asarray(v, dtype=float)
    X = np.asarray(X, dtype=float)
    k, p = X.shape
    w = 1.0 / v
    xtwx_inv = np.linalg.inv(X.T @ (X * w[:, None]))
    beta = xtwx_inv @ (X.T @ (w * y))
    r = y - X @ beta
    q = float((w * r * r).sum())
    tr_p = float(w.sum() - np.trace(xtwx_inv @ (X.T @ (X * (w**2)[:, None]))))
    if k - p < 1 or tr_p <= 0:
        return 0.0
    return max(0.0, (q - (k - p)) / tr_p)


def _moderator_columns(
    data: StudyData, moderator, name: str | None
) -> tuple[np.ndarray, tuple[str, ...], str, str | None] | NotComputable:
    labels = _labels(data)
    rows = data.rows if len(data.rows) == data.k else tuple(range(data.k))
    if isinstance(moderator, str):
        by = moderator
        labs = _labels_for(data, by)
        if isinstance(labs, NotComputable):
            return labs
        for i, lab in enumerate(labs):
            if not lab:
                return NotComputable(
                    f"study '{labels[i]}' (table row {rows[i] + 1}) has no {by} entry; fill "
                    f"it in or exclude the study to use {GROUPINGS[by]} as a moderator"
                )
        order = _level_order(labs, by)
        if len(order) < 2:
            return NotComputable(
                f"all studies share one {GROUPINGS[by]} level, so it cannot be a moderator"
            )
        ref = order[0]
        cols = np.column_stack([[1.0 if lab == lv else 0.0 for lab in labs] for lv in order[1:]])
        names = tuple(f"{by}: {lv} vs {ref}" for lv in order[1:])
        return cols, names, by, ref
    m = np.asarray(moderator, dtype=float)
    if m.ndim != 1 or m.size != data.k:
        raise ValueError("a numeric moderator must have one value per study")
    for i in range(data.k):
        if not math.isfinite(m[i]):
            return NotComputable(
                f"study '{labels[i]}' (table row {rows[i] + 1}) has no value for the "
                f"moderator; fill it in or exclude the study"
            )
    mod_name = name or "moderator"
    return m[:, None], (mod_name,), mod_name, None


def _labels(data: StudyData) -> tuple[str, ...]:
    if len(data.labels) == data.k:
        return data.labels
    return tuple(f"Study {i + 1}" for i in range(data.k))


def _re_fit(
    y: np.ndarray, v: np.ndarray, X: np.ndarray, names, test: str, level: float
) -> tuple[WLSFit, float] | NotComputable:
    k, p = X.shape
    if k - p < 1:
        return NotComputable(
            f"a meta-regression with {p} coefficients needs at least {p + 1} studies"
        )
    check = wls(y, X, 1.0 / v, names=names, scaling="fixed")
    if isinstance(check, NotComputable):
        return check
    t2 = tau2_moments(y, v, X)
    fit = wls(
        y,
        X,
        1.0 / (v + t2),
        names=names,
        scaling="floored" if test == "knapp-hartung" else "fixed",
        confidence_level=level,
    )
    if isinstance(fit, NotComputable):
        return fit
    return fit, t2


def meta_regression(
    data: StudyData,
    moderator,
    *,
    with_se: bool = True,
    test: str = "knapp-hartung",
    moderator_name: str | None = None,
    alpha: float = 0.10,
    confidence_level: float = 0.95,
) -> MetaRegressionResult | NotComputable:
    """Random-effects meta-regression of y on a moderator (and on SE).

    Parameters
    ----------
    data : StudyData
    moderator : ndarray or {"risk_of_bias", "subgroup"}
        One numeric value per study, or a grouping field, dummy-coded against its
        first level (for risk of bias: "low" when present).
    with_se : bool
        Also include the SE as a covariate (Thompson & Sharp 1999 style), and compare
        its slope with and without the moderator.
    test : {"knapp-hartung", "z"}
    moderator_name : str, optional
        Label for a numeric moderator.
    alpha : float
        Level used in ``se_answer`` (0.10 is the usual level for asymmetry tests,
        Egger et al. 1997).
    confidence_level : float

    Returns
    -------
    MetaRegressionResult or NotComputable
    """
    from scipy.special import chdtrc

    if test not in TESTS:
        raise ValueError(f"unknown test {test!r}; use one of {TESTS}")
    cols = _moderator_columns(data, moderator, moderator_name)
    if isinstance(cols, NotComputable):
        return cols
    M, mnames, mlabel, ref = cols
    y = np.asarray(data.y, dtype=float)
    se = np.asarray(data.se, dtype=float)
    v = se**2
    k = y.size
    ones = np.ones((k, 1))
    if with_se:
        X = np.hstack([ones, M, se[:, None]])
        names = ("intercept",) + mnames + ("se",)
    else:
        X = np.hstack([ones, M])
        names = ("intercept",) + mnames
    res = _re_fit(y, v, X, names, test, confidence_level)
    if isinstance(res, NotComputable):
        return NotComputable(f"the meta-regression cannot be fitted: {res.reason}")
    fit, t2 = res
    p = X.shape[1]
    df = k - p
    mod_test = _moderator_test(fit, M.shape[1], df, test)

    # Residual heterogeneity with FE weights.
    fe_fit = wls(y, X, 1.0 / v, names=names, scaling="fixed")
    beta_fe = np.array([c.estimate for c in fe_fit.coefficients])
    q_res = float(((y - X @ beta_fe) ** 2 / v).sum())

    se_without: Coefficient | NotComputable | None = None
    se_with: Coefficient | None = None
    answer = "the SE was not included in the model"
    if with_se:
        se_with = fit.coef("se")
        se_without, answer = _se_slope_answer(y, v, se, se_with, test, alpha, confidence_level)
    note = ""
    if k < 10 * (p - 1):
        note = (
            "few studies for the number of covariates (fewer than ten per covariate): "
            "meta-regression results are unreliable and prone to chance findings"
        )
    return MetaRegressionResult(
        coefficients=fit.coefficients,
        tau2=float(t2),
        tau2_method="method of moments",
        test=test,
        df=df if test == "knapp-hartung" else None,
        k=int(k),
        moderator=mlabel,
        reference_level=ref,
        moderator_test=mod_test,
        q_residual=q_res,
        q_residual_df=int(df),
        q_residual_pvalue=float(chdtrc(df, q_res)),
        se_without=se_without,
        se_with=se_with,
        se_answer=answer,
        confidence_level=confidence_level,
        note=note,
    )


def _moderator_test(fit, m: int, df: int, test: str) -> ModeratorTest:
    """Joint Wald test of the moderator columns (1 .. 1 + m): chi-square or F."""
    from scipy.special import chdtrc, fdtrc

    sl = slice(1, 1 + m)
    b = np.array([c.estimate for c in fit.coefficients])[sl]
    V = np.array(fit.cov)[sl, sl]
    wald = float(b @ np.linalg.solve(V, b))
    if test == "z":
        return ModeratorTest(wald, m, None, float(chdtrc(m, wald)), "chi-square")
    return ModeratorTest(wald / m, m, df, float(fdtrc(m, df, wald / m)), "F")


def _se_slope_answer(y, v, se, se_with: Coefficient, test, alpha, confidence_level):
    """(the SE slope without the moderator, does the slope persist with it, in words)."""
    k = y.size
    base = _re_fit(
        y, v, np.column_stack([np.ones(k), se]), ("intercept", "se"), test, confidence_level
    )
    if isinstance(base, NotComputable):
        return base, f"the model with SE alone cannot be fitted: {base.reason}"
    se_without = base[0].coef("se")
    before = se_without.pvalue < alpha
    after = se_with.pvalue < alpha
    nums = (
        f"slope on SE {se_without.estimate:.3g} (p = {se_without.pvalue:.3g}) without "
        f"the moderator, {se_with.estimate:.3g} (p = {se_with.pvalue:.3g}) with it"
    )
    if se_without.estimate != 0:
        kept = 100.0 * se_with.estimate / se_without.estimate
        nums += f"; the slope keeps {kept:.0f}% of its size"
    if before and after:
        answer = f"Yes: the SE slope persists with the moderator in the model ({nums})."
    elif before and not after:
        answer = (
            f"Not clearly: the SE slope is no longer below the level once the "
            f"moderator is in the model ({nums}); the moderator may explain part of "
            f"the small-study effect, or the two cannot be told apart with these "
            f"studies."
        )
    elif not before and after:
        answer = f"The SE slope appears only once the moderator is included ({nums})."
    else:
        answer = f"There is no clear SE slope with or without the moderator ({nums})."
    return se_without, answer + f" Level {alpha:g}."
