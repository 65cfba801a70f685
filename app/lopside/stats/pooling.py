"""Inverse-variance pooling, between-study variance and heterogeneity.

All functions take effects ``y`` on the analysis scale and within-study variances ``v``
(numpy arrays of equal length, finite, v > 0 — the caller drops unusable studies) and
return frozen results or :class:`NotComputable`. Formulas: methods.md section 2.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .results import ConfidenceInterval, NotComputable, PooledEstimate

#: random-effects tau^2 estimators offered
TAU2_METHODS: tuple[str, ...] = ("DL", "PM", "REML")
TAU2_NAMES: dict[str, str] = {
    "DL": "DerSimonian-Laird",
    "PM": "Paule-Mandel",
    "REML": "restricted maximum likelihood",
}
_MAX_ITER = 1000
_TOL = 1e-10


def _norm_ppf(p: float) -> float:
    from scipy.special import ndtri

    return float(ndtri(p))


def _norm_sf2(z: float) -> float:
    """Two-sided normal p-value."""
    from scipy.special import ndtr

    return float(2.0 * ndtr(-abs(z)))


def _t_ppf(p: float, df: float) -> float:
    from scipy.special import stdtrit

    return float(stdtrit(df, p))


def _t_sf2(t: float, df: float) -> float:
    from scipy.special import stdtr

    return float(2.0 * stdtr(df, -abs(t)))


def _chi2_sf(x: float, df: float) -> float:
    from scipy.special import chdtrc

    return float(chdtrc(df, x))


def _as_arrays(y, v) -> tuple[np.ndarray, np.ndarray]:
    return np.asarray(y, dtype=float), np.asarray(v, dtype=float)


# --------------------------------------------------------------------------------------
# Fixed effect


def fixed_effect(y, v, *, confidence_level: float = 0.95) -> PooledEstimate | NotComputable:
    """Inverse-variance fixed-effect (common-effect) estimate (methods.md 2.1)."""
    y, v = _as_arrays(y, v)
    if y.size == 0:
        return NotComputable("no study has a usable effect and standard error")
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
# Between-study variance


@dataclass(frozen=True, slots=True)
class Tau2Estimate:
    method: str
    tau2: float
    converged: bool = True
    iterations: int = 0
    note: str = ""


def cochran_q(y, v) -> float:
    y, v = _as_arrays(y, v)
    w = 1.0 / v
    mu = (w * y).sum() / w.sum()
    return float((w * (y - mu) ** 2).sum())


def tau2_dl(y, v) -> Tau2Estimate:
    """DerSimonian & Laird (1986) moment estimator."""
    y, v = _as_arrays(y, v)
    k = y.size
    if k < 2:
        return Tau2Estimate("DL", 0.0, note="one study: no between-study variance")
    w = 1.0 / v
    q = cochran_q(y, v)
    c = w.sum() - (w**2).sum() / w.sum()
    if c <= 0:
        return Tau2Estimate("DL", 0.0)
    return Tau2Estimate("DL", max(0.0, (q - (k - 1)) / c))


def _generalised_q(y: np.ndarray, v: np.ndarray, tau2: float) -> float:
    w = 1.0 / (v + tau2)
    mu = (w * y).sum() / w.sum()
    return float((w * (y - mu) ** 2).sum())


def _solve_decreasing(f, target: float, lo: float = 0.0) -> tuple[float, bool, int]:
    """Solve f(x) = target for a decreasing f on [lo, inf) by bracketing + Brent."""
    from scipy.optimize import brentq

    if f(lo) <= target:
        return lo, True, 0
    hi = max(1.0, lo * 2.0 + 1.0)
    n = 0
    while f(hi) > target:
        hi *= 2.0
        n += 1
        if n > 200:
            return hi, False, n
    root, res = brentq(
        lambda x: f(x) - target, lo, hi, xtol=1e-12, rtol=1e-12, full_output=True, maxiter=_MAX_ITER
    )
    return float(root), bool(res.converged), int(res.iterations)


def tau2_pm(y, v) -> Tau2Estimate:
    """Paule & Mandel (1982): generalised Q equal to its expectation k - 1."""
    y, v = _as_arrays(y, v)
    k = y.size
    if k < 2:
        return Tau2Estimate("PM", 0.0, note="one study: no between-study variance")
    root, ok, it = _solve_decreasing(lambda t: _generalised_q(y, v, t), k - 1.0)
    return Tau2Estimate(
        "PM", root, converged=ok, iterations=it, note="" if ok else "Paule-Mandel did not converge"
    )


def restricted_loglik(y, v, tau2: float) -> float:
    """Restricted log-likelihood of the random-effects model (up to a constant)."""
    y, v = _as_arrays(y, v)
    w = 1.0 / (v + tau2)
    mu = (w * y).sum() / w.sum()
    return float(-0.5 * (np.log(v + tau2).sum() + math.log(w.sum()) + (w * (y - mu) ** 2).sum()))


def _restricted_loglik_grid(y: np.ndarray, v: np.ndarray, grid: np.ndarray) -> np.ndarray:
    """restricted_loglik at many tau^2 values at once (one row per grid value)."""
    vt = v[None, :] + grid[:, None]
    w = 1.0 / vt
    sw = w.sum(axis=1)
    mu = (w * y[None, :]).sum(axis=1) / sw
    rss = (w * (y[None, :] - mu[:, None]) ** 2).sum(axis=1)
    return -0.5 * (np.log(vt).sum(axis=1) + np.log(sw) + rss)


#: the safeguard grid of tau2_reml in units of its scale (0 is added in front)
_GRID_UNIT = np.logspace(-4, 2, 49)


def _grid_scale(y: np.ndarray, v: np.ndarray, start: float) -> float:
    """max(var(y), median(v), start, 1e-12): the same numbers as np.var and np.median."""
    k = y.size
    d = y - y.sum() / k
    var = float((d * d).sum() / k)
    s = np.sort(v)
    h = k // 2
    med = float(s[h]) if k % 2 else float((s[h - 1] + s[h]) / 2.0)
    return max(var, med, start, 1e-12)


def tau2_reml(y, v, *, max_iter: int = _MAX_ITER) -> Tau2Estimate:
    """REML: the global maximiser of the restricted likelihood on tau^2 >= 0.

    Fisher scoring (Viechtbauer 2005) with step-halving and a cap, started from the best
    of DL and a coarse grid: the restricted likelihood can have a local maximum inside
    (0, inf) that is lower than its value at the boundary 0, so scoring from DL alone can
    stop at the wrong place. Non-convergence within ``max_iter`` is reported, not hidden.
    """
    y, v = _as_arrays(y, v)
    k = y.size
    if k < 2:
        return Tau2Estimate("REML", 0.0, note="one study: no between-study variance")
    start = tau2_dl(y, v).tau2
    est, ll_est = _reml_scoring(y, v, start, max_iter)
    grid = np.concatenate(([0.0], _grid_scale(y, v, start) * _GRID_UNIT))
    lls = _restricted_loglik_grid(y, v, grid)
    best = int(np.argmax(lls))
    if lls[best] > ll_est + 1e-10:
        est, ll_est = _reml_scoring(y, v, float(grid[best]), max_iter)
        if ll_est < lls[best]:
            est = Tau2Estimate("REML", float(grid[best]), est.converged, est.iterations, est.note)
    return est


def _reml_point(y: np.ndarray, v: np.ndarray, tau2: float):
    """Restricted log-likelihood at tau2 and what the next scoring step needs from it.

    The same expressions as :func:`restricted_loglik`, evaluated once per point.
    """
    vt = v + tau2
    w = 1.0 / vt
    sw = w.sum()
    mu = (w * y).sum() / sw
    r2 = (y - mu) ** 2
    ll = float(-0.5 * (np.log(vt).sum() + math.log(sw) + (w * r2).sum()))
    return ll, w, sw, r2


def _reml_scoring(
    y: np.ndarray, v: np.ndarray, tau2: float, max_iter: int
) -> tuple[Tau2Estimate, float]:
    """Fisher scoring from ``tau2``; returns the estimate and its restricted log-likelihood."""
    ll, w, sw, r2 = _reml_point(y, v, tau2)
    for it in range(1, max_iter + 1):
        # P-matrix quantities for the REML score and information (diagonal W, 1-column X)
        # score = -1/2 tr(P) + 1/2 r' W W r ; info = 1/2 tr(P P)
        w2 = w**2
        s2 = w2.sum()
        trp = sw - s2 / sw
        score = -0.5 * trp + 0.5 * (w2 * r2).sum()
        trpp = s2 - 2.0 * (w**3).sum() / sw + (s2 / sw) ** 2
        info = 0.5 * trpp
        if info <= 0:
            break
        step = score / info
        new = max(0.0, tau2 + step)
        new_ll, w, sw, r2 = _reml_point(y, v, new)
        halvings = 0
        while new_ll < ll - 1e-12 and halvings < 60:
            step /= 2.0
            new = max(0.0, tau2 + step)
            new_ll, w, sw, r2 = _reml_point(y, v, new)
            halvings += 1
        if abs(new - tau2) < _TOL * max(1.0, tau2):
            return Tau2Estimate("REML", new, iterations=it), new_ll
        tau2, ll = new, new_ll
    est = Tau2Estimate(
        "REML",
        tau2,
        converged=False,
        iterations=max_iter,
        note=f"REML did not converge within {max_iter} iterations; last value shown",
    )
    return est, ll


def estimate_tau2(y, v, method: str) -> Tau2Estimate:
    if method == "DL":
        return tau2_dl(y, v)
    if method == "PM":
        return tau2_pm(y, v)
    if method == "REML":
        return tau2_reml(y, v)
    raise ValueError(f"unknown tau^2 method {method!r}; use one of {TAU2_METHODS}")


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


# --------------------------------------------------------------------------------------
# Heterogeneity


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
