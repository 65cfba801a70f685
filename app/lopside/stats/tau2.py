"""Between-study variance (tau^2) estimators: DerSimonian-Laird, Paule-Mandel and REML, with
Cochran's Q and the restricted log-likelihood they rest on, and :func:`reuse_tau2`, the
memo one analysis shares. Formulas: methods.md section 2.
"""

from __future__ import annotations

import contextlib
import contextvars
import math
from dataclasses import dataclass

import numpy as np

from lopside.stats.pooling_base import _as_arrays

#: random-effects tau^2 estimators offered
TAU2_METHODS: tuple[str, ...] = ("DL", "PM", "REML")


TAU2_NAMES: dict[str, str] = {
    "DL": "DerSimonian-Laird",
    "PM": "Paule-Mandel",
    "REML": "restricted maximum likelihood",
}


_MAX_ITER = 1000


_TOL = 1e-10


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
    return checked_on_grid(y, v, est, ll_est, start, max_iter)


def checked_on_grid(y, v, est: Tau2Estimate, ll_est: float, dl: float, max_iter: int):
    """``est`` (restricted log-likelihood ``ll_est``), or the maximum scored from the best
    point of the safeguard grid when the likelihood there is higher: the check of
    :func:`tau2_reml` for a second, higher maximum (the grid's scale uses ``dl``, the
    DerSimonian-Laird value)."""
    grid = np.concatenate(([0.0], _grid_scale(y, v, dl) * _GRID_UNIT))
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


def analysis_memo() -> dict | None:
    """The memo of the current :func:`reuse_tau2` block (None outside one).

    Other deterministic steps of the same analysis may keep their results there, under
    keys of their own (a tuple whose first item names the step): trim and fill's
    trimming, which two of its settings share."""
    return _REUSE.get()


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
