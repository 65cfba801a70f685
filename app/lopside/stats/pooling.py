"""Inverse-variance pooling, between-study variance and heterogeneity.

All functions take effects ``y`` on the analysis scale and within-study variances ``v``
(numpy arrays of equal length, finite, v > 0 — the caller drops unusable studies) and
return frozen results or :class:`NotComputable`. Formulas: methods.md section 2.
"""

from __future__ import annotations

import contextlib
import contextvars
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


TOO_EXTREME = (
    "the effects or standard errors are too extreme for reliable arithmetic; check the "
    "entered values"
)


def _too_extreme(y: np.ndarray, v: np.ndarray) -> bool:
    """True when the weighted sums that every estimator needs overflow or are not finite."""
    with np.errstate(all="ignore"):
        return not (
            np.all(np.isfinite(y))
            and np.all(np.isfinite(v))
            and np.all(v > 0)
            and np.isfinite((y * y / v).sum())
            and np.isfinite((1.0 / v).sum())
        )


def _as_arrays(y, v) -> tuple[np.ndarray, np.ndarray]:
    return np.asarray(y, dtype=float), np.asarray(v, dtype=float)


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


#: Fisher scoring iterations before the score equation is solved by bracketing instead
_SCORING_ITER = 100


def _reml_score(y: np.ndarray, v: np.ndarray, tau2: float) -> float:
    """Derivative of the restricted log-likelihood with respect to tau^2."""
    _, w, sw, r2 = _reml_point(y, v, tau2)
    w2 = w**2
    return float(-0.5 * (sw - w2.sum() / sw) + 0.5 * (w2 * r2).sum())


def _reml_by_root(y: np.ndarray, v: np.ndarray, tau2: float) -> tuple[Tau2Estimate, float] | None:
    """Solve score(tau^2) = 0 by Brent's method on a bracket around ``tau2``.

    Fisher scoring uses the expected information; where the observed curvature is much
    larger (seen on real-looking data: 2.6 times), its steps overshoot and oscillate
    around the maximum instead of converging. The score is monotone near the maximum,
    so a bracketing root search converges there.
    """
    from scipy.optimize import brentq

    s0 = _reml_score(y, v, tau2)
    if s0 == 0.0:
        return Tau2Estimate("REML", tau2), _reml_point(y, v, tau2)[0]
    if s0 > 0:
        lo, hi = tau2, max(2.0 * tau2, 1e-8)
        for _ in range(200):
            if _reml_score(y, v, hi) < 0:
                break
            lo, hi = hi, hi * 2.0
        else:
            return None
    else:
        hi, lo = tau2, tau2 / 2.0
        for _ in range(200):
            if lo < 1e-300 or _reml_score(y, v, lo) > 0:
                break
            hi, lo = lo, lo / 2.0
        if _reml_score(y, v, lo) <= 0:  # the score is negative down to 0: maximum at 0
            return Tau2Estimate("REML", 0.0), _reml_point(y, v, 0.0)[0]
    root, res = brentq(
        lambda t: _reml_score(y, v, t), lo, hi, xtol=1e-14, rtol=1e-12, full_output=True
    )
    if not res.converged:
        return None
    root = float(root)
    return Tau2Estimate("REML", root, iterations=int(res.iterations)), _reml_point(y, v, root)[0]


def _reml_scoring(
    y: np.ndarray, v: np.ndarray, tau2: float, max_iter: int
) -> tuple[Tau2Estimate, float]:
    """Fisher scoring from ``tau2`` (then a bracketing root search if scoring oscillates);
    returns the estimate and its restricted log-likelihood."""
    ll, w, sw, r2 = _reml_point(y, v, tau2)
    for it in range(1, max_iter + 1):
        if it > _SCORING_ITER:
            found = _reml_by_root(y, v, tau2)
            if found is not None:
                est, root_ll = found
                return Tau2Estimate("REML", est.tau2, iterations=it + est.iterations), root_ll
            break
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


#: the memo of reuse_tau2() in the current context (None: no reuse)
_REUSE: contextvars.ContextVar[dict | None] = contextvars.ContextVar("tau2_reuse", default=None)


@contextlib.contextmanager
def reuse_tau2():
    """Within this block, :func:`estimate_tau2` estimates each (method, studies) once.

    One analysis asks for the tau^2 of the same studies many times (each random-effects
    model with and without HKSJ, heterogeneity, trim and fill, sensitivity analyses);
    the estimators are deterministic, so a repeat returns the first (frozen) result.
    Studies count as the same when the bytes of y and v are identical. The memo belongs
    to the current thread/context and is dropped when the block ends.
    """
    token = _REUSE.set({})
    try:
        yield
    finally:
        _REUSE.reset(token)


def estimate_tau2(y, v, method: str) -> Tau2Estimate:
    """tau^2 by ``method`` ("DL", "PM" or "REML"); see :func:`reuse_tau2`."""
    memo = _REUSE.get()
    if memo is None:
        return _estimate_tau2(y, v, method)
    y, v = _as_arrays(y, v)
    key = (method, y.tobytes(), v.tobytes())
    est = memo.get(key)
    if est is None:
        est = memo[key] = _estimate_tau2(y, v, method)
    return est


def _estimate_tau2(y, v, method: str) -> Tau2Estimate:
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


# --------------------------------------------------------------------------------------
# Many subsets of the same studies at once
#
# Leave-one-out and cumulative analyses pool k subsets of one set of studies. The batched
# functions take the studies once and a boolean ``mask`` with one row per subset and give,
# row by row, what the scalar functions give for y[mask[b]], v[mask[b]] (to rounding; the
# same iterations are run). Work proceeds in blocks of rows small enough to stay in the
# processor cache, so memory stays bounded for thousands of studies. A row whose REML
# estimate cannot be certified cheaply (see _reml_certify) is handed to tau2_reml itself.

#: elements of a (subsets x studies) block worked on at once (fits in the cache)
_BLOCK = 1 << 17
_EPS = float(np.finfo(float).eps)


@dataclass(frozen=True, slots=True, eq=False)
class Tau2Batch:
    """tau^2 of many subsets: one entry per row of the mask.

    ``iterations`` counts the scoring steps (REML) or solver steps (PM, our own safeguarded
    Newton solver rather than Brent's, so the count differs from :func:`tau2_pm`'s).
    """

    method: str
    tau2: np.ndarray
    converged: np.ndarray
    iterations: np.ndarray
    notes: tuple[str, ...]

    def estimate(self, b: int) -> Tau2Estimate:
        """Row ``b`` as the scalar functions report it."""
        return Tau2Estimate(
            self.method,
            float(self.tau2[b]),
            bool(self.converged[b]),
            int(self.iterations[b]),
            self.notes[b],
        )


def _quietly(fn):
    """Run a batched function with division warnings off: empty rows divide by zero and
    are reported as NotComputable (or nan) afterwards."""
    import functools

    @functools.wraps(fn)
    def wrapper(*args, **kw):
        with np.errstate(invalid="ignore", divide="ignore"):
            return fn(*args, **kw)

    return wrapper


def _batch_arrays(y, v, mask) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    y, v = _as_arrays(y, v)
    mask = np.asarray(mask, dtype=bool)
    if mask.ndim != 2 or mask.shape[1] != y.size or v.shape != y.shape:
        raise ValueError("mask must have one column per study and y, v one entry per study")
    return y, v, mask


def _blocks(mask: np.ndarray, rows: np.ndarray | None = None):
    """(row indices, column indices, float mask block) over blocks of rows.

    Only the columns used by some row of the block are kept, so that prefixes (cumulative
    analysis) cost about half of the full square.
    """
    if rows is None:
        rows = np.arange(mask.shape[0])
    step = max(1, _BLOCK // max(1, mask.shape[1]))
    for start in range(0, rows.size, step):
        r = rows[start : start + step]
        m = mask[r]
        used = m.any(axis=0)
        cols = np.flatnonzero(used) if not used.all() else np.arange(mask.shape[1])
        yield r, cols, m[:, cols].astype(float)


def _fe_parts(yb: np.ndarray, vb: np.ndarray, mb: np.ndarray):
    """Inverse-variance sums of each row: sum w, mean, Cochran's Q, sum w^2."""
    w = mb / vb
    sw = w.sum(axis=1)
    mu = (w * yb).sum(axis=1) / sw
    r = yb - mu[:, None]
    q = (w * (r * r)).sum(axis=1)
    return sw, mu, q, (w * w).sum(axis=1)


@_quietly
def cochran_q_batch(y, v, mask) -> np.ndarray:
    """Cochran's Q of each subset (:func:`cochran_q` row by row; nan for an empty row)."""
    y, v, mask = _batch_arrays(y, v, mask)
    out = np.full(mask.shape[0], np.nan)
    for r, c, mb in _blocks(mask):
        out[r] = _fe_parts(y[c], v[c], mb)[2]
    return out


def _one_study_notes(n: np.ndarray) -> list[str]:
    return ["one study: no between-study variance" if x < 2 else "" for x in n]


@_quietly
def tau2_dl_batch(y, v, mask) -> Tau2Batch:
    """:func:`tau2_dl` of each subset."""
    y, v, mask = _batch_arrays(y, v, mask)
    n = mask.sum(axis=1)
    tau2 = np.zeros(mask.shape[0])
    for r, c, mb in _blocks(mask):
        sw, _, q, s2 = _fe_parts(y[c], v[c], mb)
        cc = sw - s2 / sw
        t = np.maximum(0.0, (q - (n[r] - 1)) / cc)
        tau2[r] = np.where((n[r] >= 2) & (cc > 0), t, 0.0)
    return Tau2Batch(
        "DL", tau2, np.ones(n.size, bool), np.zeros(n.size, int), tuple(_one_study_notes(n))
    )


def _reml_eval(vb: np.ndarray, z: np.ndarray, mb: np.ndarray, t: np.ndarray):
    """Restricted log-likelihood, score and information of each row at its own tau^2.

    ``z`` holds the columns 1, y, y^2 with y centred (the likelihood does not change when
    y is shifted): the sums of squares are then formed from matrix products without
    losing digits.
    """
    vt = vb + t[:, None]
    w = mb / vt
    w2 = w * w
    sw, swy, swy2 = (w @ z).T
    s2, s2y, s2y2 = (w2 @ z).T
    mu = swy / sw
    rss = swy2 - mu * swy
    s2r2 = s2y2 - 2.0 * mu * s2y + mu * mu * s2
    lg = np.log(vt, out=vt)
    ll = -0.5 * (np.einsum("ij,ij->i", mb, lg) + np.log(sw) + rss)
    score = -0.5 * (sw - s2 / sw) + 0.5 * s2r2
    info = 0.5 * (s2 - 2.0 * np.einsum("ij,ij->i", w2, w) / sw + (s2 / sw) ** 2)
    # size of the sums behind ll (less the log terms), for rounding margins
    mag = np.abs(np.log(sw)) + swy2
    return ll, score, info, mag


def _reml_scoring_block(yb, vb, mb, start, max_iter):
    """_reml_scoring for every row of a block: the same steps, rows leaving as they converge.

    ``yb`` must be centred. Returns tau^2, its restricted log-likelihood, the size of the
    non-log sums behind it, the iteration count and a flag per row; rows that did not
    converge (or met a non-positive information) are flagged for the scalar code.
    """
    nrow = start.size
    tau2 = start.copy()
    ll_out = np.full(nrow, np.nan)
    mag_out = np.full(nrow, np.nan)
    iters = np.zeros(nrow, int)
    ok = np.zeros(nrow, bool)
    act = np.arange(nrow)
    t = start.copy()
    z = np.stack([np.ones_like(yb), yb, yb * yb], axis=1)
    ll, score, info, _ = _reml_eval(vb, z, mb, t)
    for it in range(1, max_iter + 1):
        good = info > 0
        if not good.all():  # the scalar loop stops here and reports non-convergence
            act, t, ll, score, info = act[good], t[good], ll[good], score[good], info[good]
        if act.size == 0:
            break
        m = mb[act]
        step = score / info
        new = np.maximum(0.0, t + step)
        new_ll, new_score, new_info, new_mag = _reml_eval(vb, z, m, new)
        down = np.flatnonzero(new_ll < ll - 1e-12)
        halvings = 0
        while down.size and halvings < 60:
            step[down] /= 2.0
            new[down] = np.maximum(0.0, t[down] + step[down])
            a, b, c, d = _reml_eval(vb, z, m[down], new[down])
            new_ll[down], new_score[down], new_info[down], new_mag[down] = a, b, c, d
            down = down[a < ll[down] - 1e-12]
            halvings += 1
        done = np.abs(new - t) < _TOL * np.maximum(1.0, t)
        fin = act[done]
        tau2[fin], ll_out[fin], mag_out[fin] = new[done], new_ll[done], new_mag[done]
        iters[fin], ok[fin] = it, True
        keep = ~done
        act, t, ll = act[keep], new[keep], new_ll[keep]
        score, info = new_score[keep], new_info[keep]
    return tau2, ll_out, mag_out, iters, ok


def _mask_kind(mask: np.ndarray) -> str:
    """Shape of a mask: "prefix" (leading runs), "loo" (one left out per row) or "general"."""
    if mask.shape[1] > 1 and not (mask[:, 1:] & ~mask[:, :-1]).any():
        return "prefix"
    if (mask.sum(axis=1) == mask.shape[1] - 1).all():
        return "loo"
    return "general"


def _pair_sums(yc, v, m, kind, shared, rows, i_lo, i_hi):
    """Sums over the studies of row ``rows[p]`` at shared grid points, for each pair p:
    sum log(v + a), sum |log(v + a)| at a = shared[i_lo[p]], and sum w, sum w y, sum w y^2
    (w = 1/(v + b), y centred) at b = shared[i_hi[p]].

    Leave-one-out rows are the total less one study and prefixes are running sums, so
    those cost one pass over (studies x grid points); other masks use matrix products.
    The grid is taken in slices to bound memory.
    """
    out = np.empty((5, rows.size))
    k = v.size
    width = max(8, (1 << 18) // max(1, k))
    n = m.sum(axis=1)
    left_out = np.argmin(m, axis=1) if kind == "loo" else None
    for a in range(0, shared.size, width):
        b = min(shared.size, a + width)
        sel_lo = np.flatnonzero((i_lo >= a) & (i_lo < b))
        sel_hi = np.flatnonzero((i_hi >= a) & (i_hi < b))
        if not (sel_lo.size or sel_hi.size):
            continue
        # grid points x studies, so that sums and running sums run along memory
        vt = shared[a:b, None] + v[None, :]
        lg = np.log(vt)
        w = 1.0 / vt
        wy = w * yc[None, :]
        parts = ((lg, sel_lo, i_lo), (np.abs(lg), sel_lo, i_lo), (w, sel_hi, i_hi))
        parts += ((wy, sel_hi, i_hi), (wy * yc[None, :], sel_hi, i_hi))
        for q, (f, sel, idx) in enumerate(parts):
            if not sel.size:
                continue
            col = idx[sel] - a
            rr = rows[sel]
            if kind == "loo":
                out[q, sel] = f.sum(axis=1)[col] - f[col, left_out[rr]]
            elif kind == "prefix":
                out[q, sel] = np.cumsum(f, axis=1)[col, n[rr] - 1]
            else:
                need, inv = np.unique(rr, return_inverse=True)
                out[q, sel] = (m[need].astype(float) @ f.T)[inv, col]
    return out


def _grid_bounds(yc, v, m, kind, n, shared, rows, g):
    """Upper bounds (with rounding margins) of the restricted log-likelihood of row
    ``rows[p]`` at tau^2 = g[p], from the shared grid points around g[p]."""
    i_lo = np.searchsorted(shared, g * (1 - 1e-12), side="right") - 1
    i_hi = np.minimum(np.searchsorted(shared, g * (1 + 1e-12), side="left"), shared.size - 1)
    s_log, s_abs, s_w, s_wy, s_wy2 = _pair_sums(yc, v, m, kind, shared, rows, i_lo, i_hi)
    between = s_wy * s_wy / s_w
    lsw = np.log(s_w)
    bound = -0.5 * (s_log + lsw + np.maximum(s_wy2 - between, 0.0))
    # running sums and matrix products err by up to n ulps of the magnitudes summed
    return bound + 4.0 * (n[rows] + 16) * _EPS * (s_abs + np.abs(lsw) + s_wy2 + between + 1.0)


def _shared_grid(g: np.ndarray, ratio: float, max_points: int) -> np.ndarray:
    """0 (if needed) and a geometric grid with at most the given ratio around values g."""
    pos = g[g > 0]
    pts = [np.zeros(1)] if (g == 0).any() else []
    if pos.size:
        lo, hi = float(pos.min()) / 1.01, float(pos.max()) * 1.01
        npts = int(math.ceil(math.log(hi / lo) / math.log(ratio))) + 1
        pts.append(np.geomspace(lo, hi, min(max(npts, 2), max_points)))
    return np.concatenate(pts)


def _reml_certify(y, v, mask, rows, tau2, ll, mag, scale):
    """Rows whose scoring result the tau2_reml grid would not overturn.

    tau2_reml compares the scoring result with the restricted likelihood on the grid
    {0} U scale * _GRID_UNIT and restarts when a grid value is higher by more than 1e-10.
    Evaluating that grid for every row costs 50 passes over the data; instead, on an
    interval [a, b] of a grid shared by all rows,

        l(t) <= -1/2 [ sum log(v_i + a) + log sum 1/(v_i + b) + RSS(b) ],

    because the three terms are monotone in t (RSS(t) = min_mu sum (y_i - mu)^2/(v_i + t)
    decreases), so grid values are dismissed from shared sums: first on a coarse shared
    grid, then on a fine one around the values left (near each maximum). The few still in
    doubt are evaluated exactly. Rounding is covered by margins of a few units in the last
    place of the magnitudes summed, always in the direction of not certifying.

    ``ll`` and ``mag`` come from the scoring (_reml_eval) at ``tau2``. Returns a boolean
    array over ``rows``: False means "let tau2_reml decide".
    """
    m = mask[rows]
    n = m.sum(axis=1)
    kind = _mask_kind(m)
    yc = y - float(np.median(y))  # centred: the one-pass sums of squares lose no digits
    lmax = np.maximum(np.abs(np.log(v.min() + tau2)), np.abs(np.log(v.max() + tau2)))
    size = n * lmax + mag + 1.0  # bounds what l(tau2) sums, log terms included
    # l(tau2) from scoring used running sums and products: up to n ulps of those sizes
    limit = ll + 1e-10 - 4.0 * (n + 16) * _EPS * size
    # tau2_reml's own (pairwise) sums err by about log2(n) ulps
    pair = 4.0 * (np.log2(np.maximum(n, 2)) + 4.0) * _EPS
    grid = np.concatenate([np.zeros((rows.size, 1)), scale[:, None] * _GRID_UNIT], axis=1)
    pr = np.repeat(np.arange(rows.size), grid.shape[1])
    pg = grid.ravel()
    certified = np.ones(rows.size, bool)
    # a grid value equal to the estimate (0 and 0 on the boundary) is the same point:
    # tau2_reml's two evaluations of it differ by its own rounding only
    same = pg == tau2[pr]
    unsure = same & ~(2.0 * pair[pr] * size[pr] < 1e-10)
    certified[np.unique(pr[unsure])] = False
    pr, pg = pr[~same], pg[~same]
    # small problems: every grid value evaluated exactly costs less than the bounds
    stages = ((1.1, 100_000), (1.0005, 512)) if pr.size * v.size > (1 << 18) else ()
    for ratio, cap in stages:
        if not pr.size:
            break
        shared = _shared_grid(pg, ratio, cap)
        doubt = ~(_grid_bounds(yc, v, m, kind, n, shared, pr, pg) <= limit[pr])
        pr, pg = pr[doubt], pg[doubt]
    if pr.size:
        exact, emag = _reml_exact(y, v, m[pr], pg)
        bad = ~(exact + pair[pr] * emag <= limit[pr])
        certified[np.unique(pr[bad])] = False
    return certified


def _reml_exact(y, v, m, t):
    """Restricted log-likelihood (pairwise sums, as tau2_reml) and its magnitude per row."""
    ll = np.empty(t.size)
    mag = np.empty(t.size)
    step = max(1, _BLOCK // max(1, y.size))
    for s in range(0, t.size, step):
        mb = m[s : s + step].astype(float)
        vt = v + t[s : s + step, None]
        lg = np.log(vt)
        w = mb / vt
        sw = w.sum(axis=1)
        mu = (w * y).sum(axis=1) / sw
        rss = (w * (y - mu[:, None]) ** 2).sum(axis=1)
        ll[s : s + step] = -0.5 * ((mb * lg).sum(axis=1) + np.log(sw) + rss)
        mag[s : s + step] = (mb * np.abs(lg)).sum(axis=1) + np.abs(np.log(sw)) + rss
    return ll, mag


def _grid_scale_batch(y, v, mask, rows, start):
    """_grid_scale of each row (the same max of variance, median and start)."""
    out = np.empty(rows.size)
    order = np.argsort(v, kind="mergesort")
    vs = v[order]
    for pos in range(0, rows.size, max(1, _BLOCK // max(1, y.size))):
        r = rows[pos : pos + max(1, _BLOCK // max(1, y.size))]
        mb = mask[r].astype(float)
        n = mb.sum(axis=1)
        mean = (mb * y).sum(axis=1) / n
        d = y - mean[:, None]
        var = (mb * d * d).sum(axis=1) / n
        cs = np.cumsum(mb[:, order], axis=1)
        h = (n // 2).astype(int)
        upper = (cs < (h + 1)[:, None]).sum(axis=1)
        lower = (cs < h[:, None]).sum(axis=1)
        odd = n.astype(int) % 2 == 1
        med = np.where(odd, vs[upper], (vs[lower] + vs[upper]) / 2.0)
        sel = slice(pos, pos + r.size)
        out[sel] = np.maximum(np.maximum(np.maximum(var, med), start[sel]), 1e-12)
    return out


@_quietly
def tau2_reml_batch(y, v, mask, *, max_iter: int = _MAX_ITER) -> Tau2Batch:
    """:func:`tau2_reml` of each subset (the global maximiser, with the same safeguard).

    Parameters
    ----------
    y, v : array_like
        Effects and within-study variances of all studies (k).
    mask : array_like of bool, shape (B, k)
        Row b selects the studies of subset b.
    max_iter : int
        Cap on the scoring iterations, as in :func:`tau2_reml`.

    Returns
    -------
    Tau2Batch
    """
    y, v, mask = _batch_arrays(y, v, mask)
    nsub = mask.shape[0]
    n = mask.sum(axis=1)
    dl = tau2_dl_batch(y, v, mask).tau2
    tau2 = np.zeros(nsub)
    iters = np.zeros(nsub, int)
    ok = np.zeros(nsub, bool)
    rows = np.flatnonzero(n >= 2)
    yc = y - float(np.median(y)) if y.size else y
    ll = np.full(nsub, np.nan)
    mag = np.full(nsub, np.nan)
    for r, c, mb in _blocks(mask, rows):
        tau2[r], ll[r], mag[r], iters[r], ok[r] = _reml_scoring_block(
            yc[c], v[c], mb, dl[r], min(max_iter, _SCORING_ITER)
        )
    good = rows[ok[rows]]
    if good.size:
        scale = _grid_scale_batch(y, v, mask, good, dl[good])
        ok[good] = _reml_certify(y, v, mask, good, tau2[good], ll[good], mag[good], scale)
    converged = np.ones(nsub, bool)
    notes = _one_study_notes(n)
    for b in rows[~ok[rows]]:
        est = tau2_reml(y[mask[b]], v[mask[b]], max_iter=max_iter)
        tau2[b], converged[b], iters[b], notes[b] = (
            est.tau2,
            est.converged,
            est.iterations,
            est.note,
        )
    return Tau2Batch("REML", tau2, converged, iters, tuple(notes))


def _pm_eval(yb, vb, mb, t, target):
    """Generalised Q minus its target, and its derivative in tau^2, per row."""
    w = mb / (vb + t[:, None])
    sw = w.sum(axis=1)
    mu = (w * yb).sum(axis=1) / sw
    r2 = (yb - mu[:, None]) ** 2
    wr2 = w * r2
    return wr2.sum(axis=1) - target, -(w * wr2).sum(axis=1)


def _pm_block(yb, vb, mb, n):
    """Paule-Mandel root of each row: bracket as _solve_decreasing does, then Newton steps
    kept inside the bracket (bisection when a step would leave it)."""
    nrow = n.size
    target = n - 1.0
    root = np.zeros(nrow)
    iters = np.zeros(nrow, int)
    ok = np.ones(nrow, bool)
    f0, _ = _pm_eval(yb, vb, mb, np.zeros(nrow), target)
    act = np.flatnonzero(f0 > 0)  # the others have their root at the boundary 0
    hi = np.ones(act.size)
    doublings = 0
    while act.size:
        fh, _ = _pm_eval(yb, vb, mb[act], hi, target[act])
        up = fh > 0
        if not up.any() or doublings > 200:
            break
        hi[up] *= 2.0
        doublings += 1
    if doublings > 200:  # the scalar search gives up here too; let tau2_pm report it
        ok[act] = False
        return root, iters, ok
    lo = np.zeros(act.size)
    x = np.zeros(act.size)
    for it in range(1, 201):
        f, d = _pm_eval(yb, vb, mb[act], x, target[act])
        pos = f > 0
        lo = np.where(pos, x, lo)
        hi = np.where(pos, hi, x)
        new = x - f / d
        inside = (new > lo) & (new < hi)
        new = np.where(inside, new, 0.5 * (lo + hi))
        done = (np.abs(new - x) <= 1e-14 * np.maximum(1.0, x)) | (f == 0)
        root[act[done]] = np.where(f[done] == 0, x[done], new[done])
        iters[act[done]] = it
        keep = ~done
        act, x, lo, hi = act[keep], new[keep], lo[keep], hi[keep]
        if not act.size:
            break
    ok[act] = False
    return root, iters, ok


@_quietly
def tau2_pm_batch(y, v, mask) -> Tau2Batch:
    """:func:`tau2_pm` of each subset (the same root, found by a vectorised solver)."""
    y, v, mask = _batch_arrays(y, v, mask)
    n = mask.sum(axis=1)
    tau2 = np.zeros(n.size)
    iters = np.zeros(n.size, int)
    ok = np.ones(n.size, bool)
    rows = np.flatnonzero(n >= 2)
    for r, c, mb in _blocks(mask, rows):
        tau2[r], iters[r], ok[r] = _pm_block(y[c], v[c], mb, n[r])
    converged = np.ones(n.size, bool)
    notes = _one_study_notes(n)
    for b in rows[~ok[rows]]:
        est = tau2_pm(y[mask[b]], v[mask[b]])
        tau2[b], converged[b], iters[b], notes[b] = (
            est.tau2,
            est.converged,
            est.iterations,
            est.note,
        )
    return Tau2Batch("PM", tau2, converged, iters, tuple(notes))


def tau2_batch(y, v, mask, method: str) -> Tau2Batch:
    """:func:`estimate_tau2` of each subset."""
    if method == "DL":
        return tau2_dl_batch(y, v, mask)
    if method == "PM":
        return tau2_pm_batch(y, v, mask)
    if method == "REML":
        return tau2_reml_batch(y, v, mask)
    raise ValueError(f"unknown tau^2 method {method!r}; use one of {TAU2_METHODS}")


def _pool_rows(y, v, mask, tau2: np.ndarray, *, hksj: bool, with_weights: bool = True):
    """Estimate, sum of weights, HKSJ q numerator (if asked) and percent weights per row."""
    nsub = mask.shape[0]
    est = np.full(nsub, np.nan)
    sw = np.zeros(nsub)
    rq = np.zeros(nsub)
    weights: list[tuple[float, ...]] = [()] * nsub
    for r, c, mb in _blocks(mask):
        w = mb / (v[c] + tau2[r, None])
        s = w.sum(axis=1)
        e = (w * y[c]).sum(axis=1) / s
        if hksj:
            res = y[c] - e[:, None]
            rq[r] = (w * res * res).sum(axis=1)
        est[r], sw[r] = e, s
        if not with_weights:
            continue
        used = mb > 0
        counts = used.sum(axis=1)
        # percent weights of the studies used only, as (100 w) / sum w like the scalar code;
        # one conversion to floats per block, each row a slice of it
        flat = (100.0 * w[used] / np.repeat(s, counts)).tolist()
        start = 0
        for b, end in zip(r.tolist(), np.cumsum(counts).tolist()):
            weights[b] = tuple(flat[start:end])
            start = end
    return est, sw, rq, weights


@_quietly
def fixed_effect_batch(
    y, v, mask, *, confidence_level: float = 0.95, with_weights: bool = True
) -> tuple[PooledEstimate | NotComputable, ...]:
    """:func:`fixed_effect` of each subset (row of ``mask``), in row order.

    Parameters
    ----------
    y, v : array_like
        Effects and within-study variances of all k studies.
    mask : array_like of bool, shape (B, k)
        Row b selects the studies of subset b.
    confidence_level : float
    with_weights : bool
        Fill each result's percent weights (False leaves them empty: leave-one-out and
        cumulative rows do not show them, and at k = 3,000 they are millions of numbers).

    Returns
    -------
    tuple of PooledEstimate or NotComputable
    """
    y, v, mask = _batch_arrays(y, v, mask)
    n = mask.sum(axis=1)
    est, sw, _, weights = _pool_rows(
        y, v, mask, np.zeros(mask.shape[0]), hksj=False, with_weights=with_weights
    )
    return _fixed_results(est, sw, n, weights, confidence_level)


def _fixed_results(est, sw, n, weights, confidence_level):
    """PooledEstimate per row from the estimate and sum of weights of each subset."""
    from scipy.special import ndtr

    se = 1.0 / np.sqrt(sw)
    stat = est / se
    p = 2.0 * ndtr(-np.abs(stat))
    z = _norm_ppf(0.5 + confidence_level / 2.0)
    out: list[PooledEstimate | NotComputable] = []
    for b in range(n.size):
        if n[b] == 0:
            out.append(NotComputable("no study has a usable effect and standard error"))
            continue
        e, s = float(est[b]), float(se[b])
        out.append(
            PooledEstimate(
                model="FE-IV",
                estimate=e,
                se=s,
                ci=ConfidenceInterval(e - z * s, e + z * s),
                statistic=float(stat[b]),
                pvalue=float(p[b]),
                confidence_level=confidence_level,
                k=int(n[b]),
                weights=weights[b],
            )
        )
    return tuple(out)


@_quietly
def random_effects_batch(
    y,
    v,
    mask,
    *,
    method: str = "REML",
    hksj: bool = False,
    confidence_level: float = 0.95,
    tau2=None,
    with_weights: bool = True,
) -> tuple[PooledEstimate | NotComputable, ...]:
    """:func:`random_effects` of each subset (row of ``mask``), in row order.

    Parameters
    ----------
    y, v : array_like
        Effects and within-study variances of all k studies.
    mask : array_like of bool, shape (B, k)
        Row b selects the studies of subset b.
    method : {"DL", "PM", "REML"}
    hksj : bool
        Modified Hartung-Knapp-Sidik-Jonkman interval, as in :func:`random_effects`.
    confidence_level : float
    tau2 : float or array_like, optional
        Pool at these between-study variances (one, or one per row) instead of estimating.
    with_weights : bool
        As in :func:`fixed_effect_batch`.

    Returns
    -------
    tuple of PooledEstimate or NotComputable
    """
    y, v, mask = _batch_arrays(y, v, mask)
    nsub = mask.shape[0]
    n = mask.sum(axis=1)
    if tau2 is None:
        t2 = tau2_batch(y, v, mask, method)
        tau2_arr, converged, notes = t2.tau2, t2.converged, t2.notes
    else:
        tau2_arr = np.broadcast_to(np.asarray(tau2, dtype=float), (nsub,)).copy()
        converged, notes = np.ones(nsub, bool), ("",) * nsub
    est, sw, rq, weights = _pool_rows(y, v, mask, tau2_arr, hksj=hksj, with_weights=with_weights)
    return _random_results(
        method, est, sw, rq, n, tau2_arr, converged, notes, weights, hksj, confidence_level
    )


def _random_results(
    method, est, sw, rq, n, tau2_arr, converged, notes, weights, hksj, confidence_level
):
    """PooledEstimate per row from each subset's estimate, sum of weights, HKSJ numerator
    and tau^2 (the same arithmetic as :func:`random_effects`)."""
    from scipy.special import ndtr, stdtr, stdtrit

    nsub = n.size
    alpha_half = 0.5 + confidence_level / 2.0
    use_t = hksj & (n >= 2)
    se = 1.0 / np.sqrt(sw)
    df = (n - 1).astype(float)
    q = rq / df
    se_h = np.sqrt(np.maximum(1.0, q) / sw)
    crit_t = stdtrit(df, alpha_half)
    stat_t = est / se_h
    p_t = 2.0 * stdtr(df, -np.abs(stat_t))
    stat_z = est / se
    p_z = 2.0 * ndtr(-np.abs(stat_z))
    tq = stdtrit(n - 2.0, alpha_half)
    half = tq * np.sqrt(tau2_arr + se**2)
    z = _norm_ppf(alpha_half)
    out: list[PooledEstimate | NotComputable] = []
    for b in range(nsub):
        k = int(n[b])
        if k == 0:
            out.append(NotComputable("no study has a usable effect and standard error"))
            continue
        e = float(est[b])
        note = notes[b]
        if use_t[b]:
            s_out, crit, stat, p = float(se_h[b]), float(crit_t[b]), float(stat_t[b]), p_t[b]
            dfb: float | None = float(df[b])
        else:
            if hksj:
                note = (note + "; " if note else "") + "HKSJ needs two or more studies: z interval"
            s_out, crit, stat, p, dfb = float(se[b]), z, float(stat_z[b]), p_z[b], None
        pi = None
        if k >= 3:
            pi = ConfidenceInterval(e - float(half[b]), e + float(half[b]))
        out.append(
            PooledEstimate(
                model=method,
                estimate=e,
                se=s_out,
                ci=ConfidenceInterval(e - crit * s_out, e + crit * s_out),
                statistic=stat,
                pvalue=float(p),
                confidence_level=confidence_level,
                tau2=float(tau2_arr[b]),
                df=dfb,
                hksj=bool(use_t[b]),
                k=k,
                pi=pi,
                weights=weights[b],
                converged=bool(converged[b]),
                note=note,
            )
        )
    return tuple(out)


# --------------------------------------------------------------------------------------
# Leave-one-out for many studies in O(k) memory
#
# Pooling k subsets of k - 1 studies as above costs k x k work per iteration. For large k
# every sum over a subset is taken instead as (sum of the studies before i) + (sum of the
# studies after i), from running sums (exact downdates for FE and DL, and no cancellation
# when one study carries nearly all the weight). The iterative tau^2 of each subset
# (REML, PM) is solved by scoring steps started from the full-data tau^2 t0: the sums at
# t = t0 + d come from power series in d,
#
#     1/(v_j + t)^p = u_j^p sum_m C(p+m-1, m) (-d u_j)^m,   u_j = 1/(v_j + t0),
#
# whose power sums sum_j y_j^q u_j^r are formed once. The series is used only where
# |d| max u_j <= _SERIES_RATIO (error below 1e-18 relative with _SERIES_TERMS terms); a
# subset outside that range, or not converged, is pooled by the scalar functions.

_SERIES_TERMS = 32
_SERIES_RATIO = 0.25


def _others(x: np.ndarray) -> np.ndarray:
    """For each row i of x (studies x columns), the column sums over the other rows."""
    zero = np.zeros((1,) + x.shape[1:])
    before = np.concatenate([zero, np.cumsum(x, axis=0)[:-1]], axis=0)
    after = np.concatenate([np.cumsum(x[::-1], axis=0)[::-1][1:], zero], axis=0)
    return before + after


class _LooSeries:
    """Sums over each leave-one-out subset at tau^2 near t0, from power series."""

    def __init__(self, yc: np.ndarray, v: np.ndarray, t0: float):
        self.s = 1.0 / (float(v.min()) + t0)  # the largest u_j
        x = 1.0 / (v + t0) / self.s  # u_j / s, in (0, 1]
        powers = x[:, None] ** np.arange(1, _SERIES_TERMS + 4)[None, :]  # r = 1 .. M + 3
        # P[q][i, r - 1] = sum over j != i of yc_j^q x_j^r
        self.p = [_others(powers * (yc**q)[:, None]) for q in range(3)]
        self.t0 = t0
        m = np.arange(_SERIES_TERMS)
        from scipy.special import comb

        self.comb = {p: comb(p + m - 1, m) for p in (1, 2, 3)}

    def sums(self, rows: np.ndarray, t: np.ndarray):
        """sum w^p y^q over subset rows[b] at t[b], for (p, q) in the order
        (1,0) (1,1) (1,2) (2,0) (2,1) (2,2) (3,0); and the ratio |d| max u."""
        eps = (t - self.t0) * self.s
        # (-eps)^m for m = 0 .. M - 1, by running products
        powers = np.empty((rows.size, _SERIES_TERMS))
        powers[:, 0] = 1.0
        np.cumprod(
            np.broadcast_to(-eps[:, None], (rows.size, _SERIES_TERMS - 1)),
            axis=1,
            out=powers[:, 1:],
        )
        whole = rows.size == self.p[0].shape[0]
        out = []
        for p, q in ((1, 0), (1, 1), (1, 2), (2, 0), (2, 1), (2, 2), (3, 0)):
            coef = powers * self.comb[p]
            part = self.p[q][:, p - 1 : p - 1 + _SERIES_TERMS]
            if not whole:
                part = part[rows]
            out.append(np.einsum("ij,ij->i", coef, part) * self.s**p)
        return out, np.abs(eps)


def _loo_tau2_series(ser, yc, v, method, max_iter=100):
    """tau^2 of every leave-one-out subset by scoring (REML) or Newton (PM) steps from t0.

    Returns tau^2, a flag per subset (False: use the scalar function) and the step counts.
    """
    k = yc.size
    tau2 = np.full(k, ser.t0)
    iters = np.zeros(k, int)
    ok = np.zeros(k, bool)
    act = np.arange(k)
    t = tau2.copy()
    target = k - 2.0  # PM: generalised Q of k - 1 studies equals k - 2
    for it in range(1, max_iter + 1):
        (sw, swy, swy2, s2, s2y, s2y2, s3), ratio = ser.sums(act, t)
        bad = ratio > _SERIES_RATIO
        mu = swy / sw
        s2r2 = s2y2 - 2.0 * mu * s2y + mu * mu * s2
        if method == "REML":
            score = -0.5 * (sw - s2 / sw) + 0.5 * s2r2
            info = 0.5 * (s2 - 2.0 * s3 / sw + (s2 / sw) ** 2)
            bad |= ~(info > 0)
            new = np.maximum(0.0, t + score / info)
        else:
            f = swy2 - mu * swy - target
            # Q(t) decreases: a root at the boundary when Q(0) <= target is left to Newton
            # steps clamped at 0 (a step to 0 with f(0) < 0 ends there)
            new = np.maximum(0.0, t + f / s2r2)
            bad |= ~(s2r2 > 0)
        done = ~bad & (np.abs(new - t) < _TOL * np.maximum(1.0, t))
        fin = act[done]
        tau2[fin], iters[fin], ok[fin] = new[done], it, True
        keep = ~done & ~bad
        act, t = act[keep], new[keep]
        if not act.size:
            break
    return tau2, ok, iters


@_quietly
def leave_one_out_large(
    y, v, *, method: str, hksj: bool = False, confidence_level: float = 0.95, tau2_full=None
):
    """Fixed- and random-effects pooling without each study in turn, O(k) memory.

    The same quantities as :func:`fixed_effect_batch`, :func:`random_effects_batch` and
    :func:`cochran_q_batch` on a leave-one-out mask (without percent weights), found from
    running sums; REML and PM tau^2 by steps warm-started from the full-data ``tau2_full``
    (computed when not given). Unlike :func:`tau2_reml` the REML steps do not repeat the
    search for a higher maximum on a grid: with many studies the restricted likelihood
    without one study differs little from the full one, whose maximum was checked.

    Returns
    -------
    (fixed, random, q) : tuple of PooledEstimate, tuple of PooledEstimate, ndarray
    """
    y, v = _as_arrays(y, v)
    k = y.size
    n = np.full(k, k - 1)
    yc = y - float(np.median(y))
    centre = float(np.median(y))
    w = 1.0 / v
    sw, swy, swy2, s2 = _others(np.stack([w, w * yc, w * yc * yc, w * w], axis=1)).T
    mu = swy / sw
    q = np.maximum(swy2 - mu * swy, 0.0)
    fixed = _fixed_results(centre + mu, sw, n, [()] * k, confidence_level)
    converged = np.ones(k, bool)
    notes = [""] * k
    if method == "DL":
        cc = sw - s2 / sw
        tau2 = np.where(cc > 0, np.maximum(0.0, (q - (k - 2)) / cc), 0.0)
        ok = np.ones(k, bool)
        t0 = tau2_dl(y, v).tau2
        ser = _LooSeries(yc, v, t0)
    elif method in ("REML", "PM"):
        t0 = estimate_tau2(y, v, method).tau2 if tau2_full is None else float(tau2_full)
        ser = _LooSeries(yc, v, t0)
        tau2, ok, _ = _loo_tau2_series(ser, yc, v, method)
    else:
        raise ValueError(f"unknown tau^2 method {method!r}; use one of {TAU2_METHODS}")
    est = np.empty(k)
    swr = np.empty(k)
    rq = np.zeros(k)
    rows = np.flatnonzero(ok)
    (s_w, s_wy, s_wy2, *_), ratio = ser.sums(rows, tau2[rows])
    near = ratio <= _SERIES_RATIO
    r = rows[near]
    est[r] = centre + s_wy[near] / s_w[near]
    swr[r] = s_w[near]
    rq[r] = np.maximum(s_wy2[near] - s_wy[near] ** 2 / s_w[near], 0.0)
    for b in np.flatnonzero(~ok):
        keep = np.arange(k) != b
        t2 = estimate_tau2(y[keep], v[keep], method)
        tau2[b], converged[b], notes[b] = t2.tau2, t2.converged, t2.note
    direct = np.union1d(rows[~near], np.flatnonzero(~ok)).astype(int)
    step = max(1, _BLOCK // max(1, k))
    for s0 in range(0, direct.size, step):
        r = direct[s0 : s0 + step]
        wb = 1.0 / (v[None, :] + tau2[r, None])
        wb[np.arange(r.size), r] = 0.0
        s_w = wb.sum(axis=1)
        e = (wb * yc).sum(axis=1) / s_w
        res = yc[None, :] - e[:, None]
        est[r], swr[r] = centre + e, s_w
        rq[r] = (wb * res * res).sum(axis=1)
    random = _random_results(
        method, est, swr, rq, n, tau2, converged, tuple(notes), [()] * k, hksj, confidence_level
    )
    return fixed, random, q
