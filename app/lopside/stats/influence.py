"""Outlier and influence diagnostics for the random-effects model with intercept only
(Viechtbauer & Cheung 2010; methods.md 11.1), read off the leave-one-out result: no
second pooling.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from lopside.stats.data import StudyData
from lopside.stats.diagnostics_base import (
    COOKS_FLAG,
    COOKS_QUANTILE,
    DFFITS_FACTOR,
    HAT_FACTOR,
    OUTLIER_ALPHA,
)
from lopside.stats.results import NotComputable

# --------------------------------------------------------------------------------------
# Influence diagnostics (Viechtbauer & Cheung 2010)


@dataclass(frozen=True, slots=True, eq=False)
class Influence:
    """Case-deletion diagnostics of each study under the random-effects model.

    All arrays have one entry per study of the analysis (``StudyData`` order).

    Attributes
    ----------
    rstudent : ndarray
        Externally studentised residual (y_i − μ̂_(−i)) / sqrt(v_i + τ̂²_(−i) + Var(μ̂_(−i))).
    dffits : ndarray
        (μ̂ − μ̂_(−i)) / sqrt(h_i (v_i + τ̂²_(−i))).
    cooks : ndarray
        (μ̂ − μ̂_(−i))² / Var(μ̂).
    covratio : ndarray
        Var(μ̂_(−i)) / Var(μ̂); below 1, leaving the study out makes the estimate more
        precise.
    dfbetas : ndarray
        (μ̂ − μ̂_(−i)) / sqrt(Var(μ̂_(−i))).
    hat : ndarray
        w_i / Σw with w_i = 1/(v_i + τ̂²).
    tau2_del, q_del, i2_del, estimate_del : ndarray
        τ², Cochran's Q, I² (percent) and the pooled estimate with the study left out.
    limits : dict
        The cut-offs used: "rstudent" (Bonferroni), "rstudent_look" (1.96), "dffits",
        "cooks", "hat".
    outlier, influential : ndarray of bool
        |rstudent| beyond the Bonferroni limit; DFFITS beyond its limit and Cook's
        distance above :data:`COOKS_FLAG`.
    """

    labels: tuple[str, ...]
    rows: tuple[int, ...]
    estimate: float
    tau2: float
    tau2_method: str
    rstudent: np.ndarray
    dffits: np.ndarray
    cooks: np.ndarray
    covratio: np.ndarray
    dfbetas: np.ndarray
    hat: np.ndarray
    tau2_del: np.ndarray
    q_del: np.ndarray
    i2_del: np.ndarray
    estimate_del: np.ndarray
    limits: dict[str, float]
    outlier: np.ndarray
    influential: np.ndarray


def influence_measures(y, v, tau2, mu, var_mu, mu_del, var_del, tau2_del) -> dict[str, Any]:
    """The case-deletion formulas of Viechtbauer & Cheung 2010 for the intercept-only model.

    Parameters
    ----------
    y, v : array_like
        Effects and within-study variances (k).
    tau2, mu, var_mu : float
        τ̂², μ̂ and Var(μ̂) of the full data.
    mu_del, var_del, tau2_del : array_like
        μ̂_(−i), Var(μ̂_(−i)) and τ̂²_(−i) with study i left out (k each).

    Returns
    -------
    dict of ndarray
        "rstudent", "dffits", "cooks", "covratio", "dfbetas", "hat".

    Notes
    -----
    With τ² = 0 held fixed these are the weighted-least-squares case-deletion statistics
    with the scale known to be 1 (tests/test_diagnostics.py checks them against
    statsmodels' OLSInfluence on a WLS fit).
    """
    y = np.asarray(y, dtype=float)
    v = np.asarray(v, dtype=float)
    mu_del = np.asarray(mu_del, dtype=float)
    var_del = np.asarray(var_del, dtype=float)
    tau2_del = np.asarray(tau2_del, dtype=float)
    w = 1.0 / (v + tau2)
    hat = w / w.sum()
    shift = mu - mu_del
    return {
        "rstudent": (y - mu_del) / np.sqrt(v + tau2_del + var_del),
        "dffits": shift / np.sqrt(hat * (v + tau2_del)),
        "cooks": shift * shift / var_mu,
        "covratio": var_del / var_mu,
        "dfbetas": shift / np.sqrt(var_del),
        "hat": hat,
    }


def influence(data: StudyData, loo) -> Influence | NotComputable:
    """Influence diagnostics from a leave-one-out result (no pooling of its own).

    Parameters
    ----------
    data : StudyData
    loo : LeaveOneOutResult or NotComputable
        :func:`lopside.stats.sensitivity.leave_one_out` of the same data, without HKSJ
        (the diagnostics need the model-based variance of each estimate).
    """
    from scipy.special import chdtri, ndtri

    if isinstance(loo, NotComputable) or loo is None:
        return NotComputable(
            getattr(loo, "reason", "") or "influence diagnostics need the leave-one-out results"
        )
    if loo.hksj:
        return NotComputable("influence diagnostics need leave-one-out results without HKSJ")
    k = data.k
    if len(loo.rows) != k:
        return NotComputable("the leave-one-out results do not match the studies")
    from lopside.stats.sensitivity import leave_one_out_columns

    full = loo.full_random
    cols = leave_one_out_columns(loo)
    if cols is None or not hasattr(full, "estimate"):
        return NotComputable("a study left out could not be pooled")
    mu_del = cols.estimate
    var_del = cols.se**2
    tau2_del = cols.tau2
    q_del = cols.q
    i2_del = cols.i2
    m = influence_measures(
        data.y, data.v, full.tau2, full.estimate, full.se**2, mu_del, var_del, tau2_del
    )
    limits = {
        "rstudent": float(ndtri(1.0 - OUTLIER_ALPHA / (2.0 * k))),
        "rstudent_look": float(ndtri(1.0 - OUTLIER_ALPHA / 2.0)),
        "dffits": DFFITS_FACTOR * math.sqrt(1.0 / (k - 1)),
        "cooks": float(chdtri(1.0, 1.0 - COOKS_QUANTILE)),
        "hat": HAT_FACTOR / k,
    }
    with np.errstate(invalid="ignore"):
        outlier = np.abs(m["rstudent"]) > limits["rstudent"]
        influential = (np.abs(m["dffits"]) > limits["dffits"]) & (m["cooks"] > COOKS_FLAG)
    return Influence(
        labels=tuple(data.labels)
        if len(data.labels) == k
        else tuple(f"Study {i + 1}" for i in range(k)),
        rows=tuple(data.rows) if len(data.rows) == k else tuple(range(k)),
        estimate=float(full.estimate),
        tau2=float(full.tau2),
        tau2_method=loo.tau2_method,
        rstudent=m["rstudent"],
        dffits=m["dffits"],
        cooks=m["cooks"],
        covratio=m["covratio"],
        dfbetas=m["dfbetas"],
        hat=m["hat"],
        tau2_del=tau2_del,
        q_del=q_del,
        i2_del=i2_del,
        estimate_del=mu_del,
        limits=limits,
        outlier=outlier,
        influential=influential,
    )
