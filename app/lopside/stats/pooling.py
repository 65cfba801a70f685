"""Inverse-variance pooling: the fixed-effect and random-effects estimates with their
intervals (z or HKSJ, prediction interval).

The between-study variance lives in :mod:`.tau2`, heterogeneity in :mod:`.heterogeneity`,
many subsets at once in :mod:`.pooling_batch` and :mod:`.pooling_loo`; this module
re-exports them, so ``lopside.stats.pooling`` stays the one name callers import.

All functions take effects ``y`` on the analysis scale and within-study variances ``v``
(numpy arrays of equal length, finite, v > 0 — the caller drops unusable studies) and
return frozen results or :class:`NotComputable`. Formulas: methods.md section 2.
"""

from __future__ import annotations

import math

from lopside.stats.heterogeneity import Heterogeneity, heterogeneity, tau2_q_profile
from lopside.stats.pooling_base import (
    TOO_EXTREME,
    _as_arrays,
    _norm_ppf,
    _norm_sf2,
    _t_ppf,
    _t_sf2,
    _too_extreme,
)
from lopside.stats.pooling_batch import (
    Tau2Batch,
    cochran_q_batch,
    fixed_effect_batch,
    random_effects_batch,
    tau2_batch,
    tau2_dl_batch,
    tau2_pm_batch,
    tau2_reml_batch,
)
from lopside.stats.pooling_loo import leave_one_out_large
from lopside.stats.tau2 import (
    TAU2_METHODS,
    TAU2_NAMES,
    Tau2Estimate,
    cochran_q,
    estimate_tau2,
    restricted_loglik,
    reuse_tau2,
    tau2_dl,
    tau2_pm,
    tau2_reml,
)

from .results import ConfidenceInterval, NotComputable, PooledEstimate

#: the pooling API in one place: this module pools; the others are re-exported from it
__all__ = [
    "TAU2_METHODS",
    "TAU2_NAMES",
    "TOO_EXTREME",
    "Heterogeneity",
    "Tau2Batch",
    "Tau2Estimate",
    "cochran_q",
    "cochran_q_batch",
    "estimate_tau2",
    "fixed_effect",
    "fixed_effect_batch",
    "heterogeneity",
    "leave_one_out_large",
    "random_effects",
    "random_effects_batch",
    "restricted_loglik",
    "reuse_tau2",
    "tau2_batch",
    "tau2_dl",
    "tau2_dl_batch",
    "tau2_pm",
    "tau2_pm_batch",
    "tau2_q_profile",
    "tau2_reml",
    "tau2_reml_batch",
]

# --------------------------------------------------------------------------------------
# Fixed effect


def fixed_effect(y, v, *, confidence_level: float = 0.95) -> PooledEstimate | NotComputable:
    """Inverse-variance fixed-effect (common-effect) estimate (methods.md 2.1)."""
    y, v = _as_arrays(y, v)
    if y.size == 0:
        return NotComputable("no study has a usable effect and standard error")
    if _too_extreme(y, v):
        return NotComputable(TOO_EXTREME)
    w = 1.0 / v
    sw = w.sum()
    est = float((w * y).sum() / sw)
    se = float(1.0 / math.sqrt(sw))
    z = _norm_ppf(0.5 + confidence_level / 2.0)
    stat = est / se
    return PooledEstimate(
        model="FE-IV",
        estimate=est,
        se=se,
        ci=ConfidenceInterval(est - z * se, est + z * se),
        statistic=stat,
        pvalue=_norm_sf2(stat),
        confidence_level=confidence_level,
        k=int(y.size),
        weights=tuple((100.0 * w / sw).tolist()),
    )


# --------------------------------------------------------------------------------------
# Random effects


def random_effects(
    y,
    v,
    *,
    method: str = "REML",
    hksj: bool = False,
    confidence_level: float = 0.95,
    tau2: float | None = None,
) -> PooledEstimate | NotComputable:
    """Random-effects estimate with the chosen tau^2 estimator.

    ``hksj=True`` uses the modified Hartung-Knapp-Sidik-Jonkman interval, max(1, q)
    (Knapp & Hartung 2003; Röver, Knapp & Friede 2015), with a t on k - 1 df.
    The prediction interval (Higgins, Thompson & Spiegelhalter 2009) uses t(k - 2) and
    needs k >= 3. ``tau2`` may be given to pool at a fixed between-study variance.
    """
    y, v = _as_arrays(y, v)
    k = y.size
    if k == 0:
        return NotComputable("no study has a usable effect and standard error")
    if _too_extreme(y, v):
        return NotComputable(TOO_EXTREME)
    if tau2 is None:
        t2 = estimate_tau2(y, v, method)
    else:
        t2 = Tau2Estimate(method, float(tau2))
    w = 1.0 / (v + t2.tau2)
    sw = w.sum()
    est = float((w * y).sum() / sw)
    se = float(1.0 / math.sqrt(sw))
    alpha_half = 0.5 + confidence_level / 2.0
    df = None
    note = t2.note
    if hksj and k >= 2:
        q = float((w * (y - est) ** 2).sum() / (k - 1))
        se_h = float(math.sqrt(max(1.0, q) / sw))
        df = float(k - 1)
        crit = _t_ppf(alpha_half, df)
        stat = est / se_h
        ci = ConfidenceInterval(est - crit * se_h, est + crit * se_h)
        p = _t_sf2(stat, df)
        se_out = se_h
    else:
        if hksj:
            note = (note + "; " if note else "") + "HKSJ needs two or more studies: z interval"
        crit = _norm_ppf(alpha_half)
        stat = est / se
        ci = ConfidenceInterval(est - crit * se, est + crit * se)
        p = _norm_sf2(stat)
        se_out = se
    pi = None
    if k >= 3:
        tq = _t_ppf(alpha_half, k - 2.0)
        half = tq * math.sqrt(t2.tau2 + se**2)
        pi = ConfidenceInterval(est - half, est + half)
    return PooledEstimate(
        model=method,
        estimate=est,
        se=se_out,
        ci=ci,
        statistic=stat,
        pvalue=p,
        confidence_level=confidence_level,
        tau2=t2.tau2,
        df=df,
        hksj=bool(hksj and k >= 2),
        k=int(k),
        pi=pi,
        weights=tuple((100.0 * w / sw).tolist()),
        converged=t2.converged,
        note=note,
    )
