"""Weighted least squares shared by the adjustment, subgroup and meta-regression code.

The funnel-asymmetry tests keep their own regression code (``stats/asymmetry.py``); this
module serves ``adjust``, ``adjust_trimfill``, ``moderators`` and ``sensitivity`` only, so
the two can be checked against each other and against statsmodels.

Three ways of scaling the covariance ``(X'WX)^-1`` are offered, because the methods this
package implements use all three:

``"estimated"``
    multiplicative dispersion s² = Σ w r² / (k - p) and t(k - p) tests — the Egger /
    PET-PEESE convention (Egger et al. 1997; Stanley & Doucouliagos 2014).
``"floored"``
    max(1, s²) with t(k - p) — the modified Knapp-Hartung meta-regression test
    (Knapp & Hartung 2003), the same rule as the pooled HKSJ interval in ``pooling``.
``"fixed"``
    scale 1 with z tests — weights taken as exact inverse variances.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .results import ConfidenceInterval, NotComputable

SCALES: tuple[str, ...] = ("estimated", "floored", "fixed")


@dataclass(frozen=True, slots=True)
class Coefficient:
    """One regression coefficient with its test.

    ``df`` is the t degrees of freedom, or ``None`` when ``statistic`` is a z.
    """

    name: str
    estimate: float
    se: float
    ci: ConfidenceInterval
    statistic: float
    pvalue: float
    df: float | None
    confidence_level: float = 0.95


@dataclass(frozen=True, slots=True)
class WLSFit:
    """A weighted least-squares fit.

    Attributes
    ----------
    coefficients : tuple of Coefficient
        In the order of the design-matrix columns.
    cov : tuple of tuple of float
        Covariance matrix of the coefficients (after scaling).
    scale : float
        Factor applied to ``(X'WX)^-1``.
    residual_scale : float
        s² = Σ w r² / (k - p) whatever the scaling chosen (nan when k = p).
    df_resid : int
        k - p.
    scaling : str
        One of :data:`SCALES`.
    """

    coefficients: tuple[Coefficient, ...]
    cov: tuple[tuple[float, ...], ...]
    scale: float
    residual_scale: float
    df_resid: int
    k: int
    scaling: str

    def coef(self, name: str) -> Coefficient:
        for c in self.coefficients:
            if c.name == name:
                return c
        raise KeyError(name)


def wls(
    y,
    X,
    w,
    *,
    names: tuple[str, ...] | None = None,
    scaling: str = "estimated",
    confidence_level: float = 0.95,
) -> WLSFit | NotComputable:
    """Weighted least squares of ``y`` on the columns of ``X`` with weights ``w``.

    Parameters
    ----------
    y : array_like, shape (k,)
    X : array_like, shape (k, p)
        Design matrix (include a column of ones for an intercept).
    w : array_like, shape (k,)
        Positive weights (inverse variances).
    names : tuple of str, optional
        Column names for the coefficients.
    scaling : {"estimated", "floored", "fixed"}
        See the module docstring.
    confidence_level : float

    Returns
    -------
    WLSFit or NotComputable
        NotComputable when the design is rank-deficient (for example all standard
        errors equal), when there are no residual degrees of freedom for an estimated
        scale, or when the points lie exactly on the fitted surface.
    """
    if scaling not in SCALES:
        raise ValueError(f"unknown scaling {scaling!r}; use one of {SCALES}")
    y = np.asarray(y, dtype=float)
    X = np.asarray(X, dtype=float)
    if X.ndim == 1:
        X = X[:, None]
    w = np.asarray(w, dtype=float)
    k, p = X.shape
    if names is None:
        names = tuple(f"x{j}" for j in range(p))
    if k < p:
        return NotComputable("there are fewer studies than quantities to estimate")
    sw = np.sqrt(w)
    Xw = X * sw[:, None]
    yw = y * sw
    solved = _solve(Xw, yw)
    if isinstance(solved, NotComputable):
        return solved
    beta, xtwx_inv = solved
    resid = yw - Xw @ beta
    df_resid = k - p
    rss = float(resid @ resid)
    s2 = rss / df_resid if df_resid > 0 else math.nan
    scaled = _scale(scaling, rss, s2, df_resid, yw)
    if isinstance(scaled, NotComputable):
        return scaled
    scale, df = scaled
    cov = scale * xtwx_inv
    ses = np.sqrt(np.diag(cov))
    if not (np.all(np.isfinite(ses)) and np.all(ses > 0) and np.all(np.isfinite(beta))):
        return NotComputable(
            "the regression cannot be computed accurately: the standard errors span too "
            "many orders of magnitude (check the entries for typing or unit errors)"
        )
    return WLSFit(
        coefficients=_coefficients(beta, ses, names, df, confidence_level),
        cov=tuple(tuple(float(x) for x in row) for row in cov),
        scale=float(scale),
        residual_scale=float(s2),
        df_resid=int(df_resid),
        k=int(k),
        scaling=scaling,
    )


def _solve(Xw: np.ndarray, yw: np.ndarray) -> tuple[np.ndarray, np.ndarray] | NotComputable:
    """The coefficients and (X'WX)^-1, or NotComputable for a rank-deficient design."""
    # Rank check on the column-scaled matrix so that a covariate measured in small units
    # is not mistaken for a constant.
    norms = np.linalg.norm(Xw, axis=0)
    if np.any(norms == 0):
        return NotComputable("a covariate is zero for every study")
    _, sv, vt = np.linalg.svd(Xw / norms, full_matrices=False)
    if sv[-1] < 1e-10 * sv[0]:
        return NotComputable(
            "the covariates do not vary independently across studies (for example all "
            "standard errors are equal), so the regression cannot be fitted"
        )
    beta, *_ = np.linalg.lstsq(Xw, yw, rcond=None)
    # (X'WX)^-1 from the SVD of the column-scaled matrix Z = Xw / norms:
    # (Xw'Xw)^-1 = D^-1 V S^-2 V' D^-1. Inverting Xw'Xw itself squares the condition
    # number, and with SEs spread over many orders of magnitude that gave negative
    # variances (NaN standard errors) for designs the rank check had accepted.
    zinv = (vt.T / sv**2) @ vt
    return beta, zinv / np.outer(norms, norms)


def _scale(scaling: str, rss: float, s2: float, df_resid: int, yw: np.ndarray):
    """(the residual scale the covariance uses, the df of its t) for ``scaling``."""
    if scaling == "fixed":
        return 1.0, None
    if df_resid < 1:
        return NotComputable(
            "there are no residual degrees of freedom: the regression needs more studies"
        )
    if scaling == "estimated":
        # Relative tolerance: an exact fit in exact arithmetic leaves rounding residue.
        if rss <= 1e-24 * max(1.0, float(yw @ yw)):
            return NotComputable(
                "the studies lie exactly on the fitted line, so there is no residual "
                "spread to test against"
            )
        return s2, float(df_resid)
    return max(1.0, s2), float(df_resid)


def _coefficients(beta, ses, names, df, confidence_level) -> tuple[Coefficient, ...]:
    """Each coefficient with its z (fixed scale) or t interval and two-sided p."""
    from scipy.special import ndtr, ndtri, stdtr, stdtrit

    half = 0.5 + confidence_level / 2.0
    crit = float(ndtri(half)) if df is None else float(stdtrit(df, half))
    coefs = []
    for j in range(beta.size):
        b, s = float(beta[j]), float(ses[j])
        stat = b / s
        pv = float(2.0 * ndtr(-abs(stat))) if df is None else float(2.0 * stdtr(df, -abs(stat)))
        coefs.append(
            Coefficient(
                name=names[j],
                estimate=b,
                se=s,
                ci=ConfidenceInterval(b - crit * s, b + crit * s),
                statistic=stat,
                pvalue=pv,
                df=df,
                confidence_level=confidence_level,
            )
        )
    return tuple(coefs)


def egger_slope(y, se) -> float | None:
    """Slope of y on SE by WLS with weights 1/SE² (Egger formulation B), or None.

    Only the point estimate is needed (for the trim-and-fill side rule), so no test is
    computed. None when the SEs do not vary.
    """
    y = np.asarray(y, dtype=float)
    se = np.asarray(se, dtype=float)
    if y.size < 2:
        return None
    w = 1.0 / se**2
    sbar = (w * se).sum() / w.sum()
    ybar = (w * y).sum() / w.sum()
    sxx = float((w * (se - sbar) ** 2).sum())
    if sxx <= 1e-14 * float((w * se**2).sum()):
        return None
    return float((w * (se - sbar) * (y - ybar)).sum() / sxx)
