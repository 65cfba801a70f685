"""Heterogeneity: Cochran's Q with I^2, H and tau^2, the Higgins & Thompson (2002) interval
for H and I^2, and the Q-profile interval for tau^2 (Viechtbauer 2007). Formulas:
methods.md sections 2.3-2.4.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from lopside.stats.pooling_base import TOO_EXTREME, _as_arrays, _chi2_sf, _norm_ppf, _too_extreme
from lopside.stats.tau2 import _generalised_q, _solve_decreasing, cochran_q, estimate_tau2

from .results import ConfidenceInterval, NotComputable


@dataclass(frozen=True, slots=True)
class Heterogeneity:
    """Cochran's Q with I^2 (percent), H and tau^2, with intervals where estimable."""

    q: float
    df: int
    pvalue: float
    i2: float
    h: float
    tau2: float
    tau2_method: str
    #: Higgins & Thompson (2002) test-based interval for I^2 (percent)
    i2_ci: ConfidenceInterval | NotComputable
    h_ci: ConfidenceInterval | NotComputable
    #: Q-profile interval for tau^2 (Viechtbauer 2007; Veroniki et al. 2016)
    tau2_ci: ConfidenceInterval | NotComputable
    confidence_level: float = 0.95


def _h_interval(q: float, k: int, z: float) -> ConfidenceInterval | NotComputable:
    """Higgins & Thompson 2002 interval for H (methods.md 2.3)."""
    if k < 3:
        return NotComputable("the interval for H and I² needs at least three studies")
    h = math.sqrt(q / (k - 1)) if q > 0 else 0.0
    if q > k:
        se_ln_h = 0.5 * (math.log(q) - math.log(k - 1)) / (math.sqrt(2 * q) - math.sqrt(2 * k - 3))
    else:
        se_ln_h = math.sqrt((1.0 / (2 * (k - 2))) * (1.0 - 1.0 / (3 * (k - 2) ** 2)))
    ln_h = math.log(max(h, 1e-300)) if h > 0 else math.log(1.0)
    lo = max(1.0, math.exp(ln_h - z * se_ln_h))
    hi = max(1.0, math.exp(ln_h + z * se_ln_h))
    return ConfidenceInterval(lo, hi)


def tau2_q_profile(y, v, *, confidence_level: float = 0.95) -> ConfidenceInterval | NotComputable:
    """Q-profile interval for tau^2: values where the generalised Q stays within chi2 quantiles."""
    from scipy.special import chdtri

    y, v = _as_arrays(y, v)
    k = y.size
    if k < 2:
        return NotComputable("an interval for tau² needs at least two studies")
    alpha = 1.0 - confidence_level
    df = k - 1
    upper_q = float(chdtri(df, alpha / 2.0))  # chi2 quantile 1 - alpha/2
    lower_q = float(chdtri(df, 1.0 - alpha / 2.0))  # chi2 quantile alpha/2

    def gq(t):
        return _generalised_q(y, v, t)

    lo, ok1, _ = _solve_decreasing(gq, upper_q)
    hi, ok2, _ = _solve_decreasing(gq, lower_q)
    if not (ok1 and ok2):
        return NotComputable("the Q-profile search for the tau² interval did not converge")
    return ConfidenceInterval(lo, hi)


def heterogeneity(
    y, v, *, tau2_method: str = "REML", confidence_level: float = 0.95
) -> Heterogeneity | NotComputable:
    y, v = _as_arrays(y, v)
    k = y.size
    if k < 2:
        return NotComputable("heterogeneity needs at least two studies")
    if _too_extreme(y, v):
        return NotComputable(TOO_EXTREME)
    q = cochran_q(y, v)
    df = k - 1
    i2 = max(0.0, (q - df) / q) * 100.0 if q > 0 else 0.0
    h = math.sqrt(q / df)
    z = _norm_ppf(0.5 + confidence_level / 2.0)
    h_ci = _h_interval(q, k, z)
    if isinstance(h_ci, NotComputable):
        i2_ci: ConfidenceInterval | NotComputable = h_ci
    else:
        i2_ci = ConfidenceInterval(
            max(0.0, (h_ci.low**2 - 1) / h_ci.low**2) * 100.0,
            max(0.0, (h_ci.high**2 - 1) / h_ci.high**2) * 100.0,
        )
    t2 = estimate_tau2(y, v, tau2_method)
    return Heterogeneity(
        q=q,
        df=df,
        pvalue=_chi2_sf(q, df),
        i2=i2,
        h=h,
        tau2=t2.tau2,
        tau2_method=tau2_method,
        i2_ci=i2_ci,
        h_ci=h_ci,
        tau2_ci=tau2_q_profile(y, v, confidence_level=confidence_level),
        confidence_level=confidence_level,
    )
