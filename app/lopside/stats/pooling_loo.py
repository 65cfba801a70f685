"""Leave-one-out and cumulative analyses for many studies in O(k) memory (the note below
says how)."""

from __future__ import annotations

from functools import partial
from typing import NamedTuple

import numpy as np

from lopside.stats.pooling_base import _as_arrays
from lopside.stats.pooling_batch import _BLOCK, _fixed_results, _quietly, _random_results
from lopside.stats.tau2 import _TOL, TAU2_METHODS, estimate_tau2, tau2_dl


class LooArrays(NamedTuple):
    """The random-effects numbers of each leave-one-out row, as arrays (row i without
    study i): estimate, model-based SE (without HKSJ) and tau^2."""

    estimate: np.ndarray
    se: np.ndarray
    tau2: np.ndarray


# Pooling k subsets of k - 1 studies as pooling_batch does costs k x k work per iteration. For large k
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
#
# The prefixes of a cumulative analysis (studies in precision order) are handled the same
# way, with running sums over the first m studies in place of "before i + after i"; the
# most precise study is in every prefix, so max u_j is the same for all of them. A prefix
# outside the range of the series is pooled by the batched functions on its own mask.

_SERIES_TERMS = 32


_SERIES_RATIO = 0.25

#: the sums of sw^p y^q the series can give, in this order
_ALL_SUMS = ((1, 0), (1, 1), (1, 2), (2, 0), (2, 1), (2, 2), (3, 0))
#: the ones REML scoring and PM Newton steps use
_REML_SUMS = ((1, 0), (1, 1), (2, 0), (2, 1), (2, 2), (3, 0))
_PM_SUMS = ((1, 0), (1, 1), (1, 2), (2, 0), (2, 1), (2, 2))


def _terms_needed(ratio: float) -> int:
    """Terms of the series for a ratio |d| max u: the fewest M whose tail bound
    C(M + 2, 2) ratio^M (the largest power, p = 3) is below that of _SERIES_TERMS terms at
    _SERIES_RATIO (3e-17 of each study's leading term)."""
    if ratio <= 0.0:
        return 1
    bound = 0.5 * (_SERIES_TERMS + 1) * (_SERIES_TERMS + 2) * _SERIES_RATIO**_SERIES_TERMS
    for m in range(1, _SERIES_TERMS):
        if 0.5 * (m + 1) * (m + 2) * ratio**m <= bound:
            return m
    return _SERIES_TERMS


def _others(x: np.ndarray) -> np.ndarray:
    """For each row i of x (studies x columns), the column sums over the other rows."""
    zero = np.zeros((1,) + x.shape[1:])
    before = np.concatenate([zero, np.cumsum(x, axis=0)[:-1]], axis=0)
    after = np.concatenate([np.cumsum(x[::-1], axis=0)[::-1][1:], zero], axis=0)
    return before + after


def _prefixes(sizes: np.ndarray):
    """For each of the increasing sizes m, the column sums over the first m rows (a
    cumulative analysis): the rows between sizes summed, then running sums of those."""
    starts = np.concatenate([[0], sizes[:-1]])
    return lambda x: np.cumsum(np.add.reduceat(x[: sizes[-1]], starts, axis=0), axis=0)


class _LooSeries:
    """Sums over each subset at tau^2 near t0, from power series: the leave-one-out subsets
    (``reduce`` = :func:`_others`) or the prefixes of a cumulative analysis."""

    def __init__(self, yc: np.ndarray, v: np.ndarray, t0: float, reduce=_others):
        self.s = 1.0 / (float(v.min()) + t0)  # the largest u_j
        self.x = 1.0 / (v + t0) / self.s  # u_j / s, in (0, 1]
        self.yc = yc
        self.reduce = reduce
        self.p: list[np.ndarray] = []
        self._powers(4)
        self.t0 = t0
        m = np.arange(_SERIES_TERMS)
        from scipy.special import comb

        self.comb = {p: comb(p + m - 1, m) for p in (1, 2, 3)}

    def _powers(self, n: int) -> None:
        """P[q][i, r - 1] = sum over the studies j of subset i of yc_j^q x_j^r for
        r = 1 .. at least n (formed
        for as many powers as the steps so far needed; each column is the same whatever
        the number of columns)."""
        if self.p and self.p[0].shape[1] >= n:
            return
        have = self.p[0].shape[1] if self.p else 0
        n = min(_SERIES_TERMS + 3, max(n, 2 * have))
        powers = self.x[:, None] ** np.arange(1, n + 1)[None, :]
        self.p = [self.reduce(powers * (self.yc**q)[:, None]) for q in range(3)]

    def sums(self, rows: np.ndarray, t: np.ndarray, need=_ALL_SUMS):
        """sum w^p y^q over subset rows[b] at t[b], for (p, q) in the order
        (1,0) (1,1) (1,2) (2,0) (2,1) (2,2) (3,0) (None for a pair not in ``need``); and
        the ratio |d| max u.

        Only as many terms are summed as the largest ratio of these rows needs (near
        convergence the steps are small and a few terms reach the same 1e-17)."""
        eps = (t - self.t0) * self.s
        ratio = np.abs(eps)
        m = _terms_needed(float(ratio.max()) if ratio.size else 0.0)
        self._powers(m + 2)  # powers up to p + m - 1 with p <= 3
        # (-eps)^m for m = 0 .. M - 1, by running products
        powers = np.empty((rows.size, m))
        powers[:, 0] = 1.0
        if m > 1:
            np.cumprod(
                np.broadcast_to(-eps[:, None], (rows.size, m - 1)), axis=1, out=powers[:, 1:]
            )
        whole = rows.size == self.p[0].shape[0]
        coef = {p: powers * self.comb[p][:m] for p in {p for p, _ in need}}
        out = []
        for p, q in _ALL_SUMS:
            if (p, q) not in need:
                out.append(None)
                continue
            part = self.p[q][:, p - 1 : p - 1 + m]
            if not whole:
                part = part[rows]
            out.append(np.einsum("ij,ij->i", coef[p], part) * self.s**p)
        return out, ratio


def _loo_tau2_series(ser, yc, v, method, max_iter=100, *, n=None, start=None):
    """tau^2 of every subset by scoring (REML) or Newton (PM) steps from ``start`` (t0
    when not given); ``n`` studies per subset (k - 1 when not given: leave-one-out).

    Returns tau^2, a flag per subset (False: use the scalar function) and the step counts.
    """
    k = yc.size
    rows = ser.p[0].shape[0]
    n = np.full(rows, k - 1) if n is None else n
    tau2 = np.full(rows, ser.t0) if start is None else np.array(start, dtype=float)
    iters = np.zeros(rows, int)
    ok = np.zeros(rows, bool)
    act = np.arange(rows)
    t = tau2.copy()
    target = n - 1.0  # PM: generalised Q of n studies equals n - 1
    for it in range(1, max_iter + 1):
        need = _REML_SUMS if method == "REML" else _PM_SUMS
        (sw, swy, swy2, s2, s2y, s2y2, s3), ratio = ser.sums(act, t, need)
        bad = ratio > _SERIES_RATIO
        mu = swy / sw
        s2r2 = s2y2 - 2.0 * mu * s2y + mu * mu * s2
        if method == "REML":
            score = -0.5 * (sw - s2 / sw) + 0.5 * s2r2
            info = 0.5 * (s2 - 2.0 * s3 / sw + (s2 / sw) ** 2)
            bad |= ~(info > 0)
            new = np.maximum(0.0, t + score / info)
        else:
            f = swy2 - mu * swy - target[act]
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
    y,
    v,
    *,
    method: str,
    hksj: bool = False,
    confidence_level: float = 0.95,
    tau2_full=None,
    deferred: bool = False,
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
        With ``deferred``, ``fixed`` and ``random`` are functions that make those tuples,
        and a fourth item holds the arrays they are made from: ``LooArrays`` (the random
        effects' estimate, model-based SE and tau^2 of each row).
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
    (s_w, s_wy, s_wy2, *_), ratio = ser.sums(rows, tau2[rows], _ALL_SUMS[:3])
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
    # made now or, deferred, when first read: with division warnings off either way
    fixed = partial(_quietly(_fixed_results), centre + mu, sw, n, [()] * k, confidence_level)
    random = partial(
        _quietly(_random_results),
        method,
        est,
        swr,
        rq,
        n,
        tau2,
        converged,
        tuple(notes),
        [()] * k,
        hksj,
        confidence_level,
    )
    if deferred:
        # 1/sqrt(sum of weights): the same operation as _random_results' model-based SE
        return fixed, random, q, LooArrays(est, 1.0 / np.sqrt(swr), tau2)
    return fixed(), random(), q


@_quietly
def cumulative_large(
    y, v, sizes, *, method: str, hksj: bool = False, confidence_level: float = 0.95
):
    """Fixed- and random-effects pooling of the first ``sizes[b]`` studies, O(k) memory.

    The same quantities as :func:`fixed_effect_batch` and :func:`random_effects_batch`
    (``reml_grid=False``, without percent weights) on the prefix mask
    ``arange(k) < sizes[:, None]``, found from running sums: the fixed effect and DL
    exactly; REML (scoring from each prefix's DL value, as the batch does) and PM (Newton
    steps from the DL value) with the sums at each step from the power series around the
    tau^2 of all studies (see the note at the top). A prefix whose steps leave the range
    of the series, or do not settle, is pooled by the batched functions on its own mask.

    Returns
    -------
    (fixed, random) : tuple of PooledEstimate, tuple of PooledEstimate
    """
    from lopside.stats.pooling_batch import _one_study_notes, _pool_rows, tau2_batch
    from lopside.stats.tau2 import _reml_scoring, tau2_pm

    y, v = _as_arrays(y, v)
    sizes = np.asarray(sizes, dtype=int)
    k = y.size
    centre = float(np.median(y))
    yc = y - centre
    w = 1.0 / v
    sw, swy, swy2, s2 = _prefixes(sizes)(np.stack([w, w * yc, w * yc * yc, w * w], axis=1)).T
    mu = swy / sw
    fixed = _fixed_results(centre + mu, sw, sizes, [()] * sizes.size, confidence_level)
    # DL of each prefix, as tau2_dl_batch
    q = np.maximum(swy2 - mu * swy, 0.0)
    cc = sw - s2 / sw
    dl = np.where((sizes >= 2) & (cc > 0), np.maximum(0.0, (q - (sizes - 1)) / cc), 0.0)
    converged = np.ones(sizes.size, bool)
    notes = _one_study_notes(sizes)
    if method == "DL":
        tau2, t0, ok = dl, float(dl[-1]), np.ones(sizes.size, bool)
    elif method in ("REML", "PM"):
        if method == "REML":  # all studies, by the same scoring from DL (no grid)
            t0 = _reml_scoring(y, v, tau2_dl(y, v).tau2, 100)[0].tau2
        else:
            t0 = tau2_pm(y, v).tau2
        ser = _LooSeries(yc, v, t0, _prefixes(sizes))
        many = sizes >= 2
        tau2 = np.zeros(sizes.size)
        ok = ~many  # one study: tau^2 = 0
        t_m, ok_m, _ = _loo_tau2_series(ser, yc, v, method, n=sizes, start=dl)
        tau2[many], ok[many] = t_m[many], ok_m[many]
        redo = np.flatnonzero(~ok)
        if redo.size:
            mask = np.arange(k)[None, :] < sizes[redo, None]
            t2 = tau2_batch(y, v, mask, method, reml_grid=False)
            tau2[redo], converged[redo] = t2.tau2, t2.converged
            for j, b in enumerate(redo.tolist()):
                notes[b] = t2.notes[j]
    else:
        raise ValueError(f"unknown tau^2 method {method!r}; use one of {TAU2_METHODS}")
    if method == "DL":
        ser = _LooSeries(yc, v, t0, _prefixes(sizes))
    est = np.empty(sizes.size)
    swr = np.empty(sizes.size)
    rq = np.zeros(sizes.size)
    rows = np.arange(sizes.size)
    (s_w, s_wy, s_wy2, *_), ratio = ser.sums(rows, tau2, _ALL_SUMS[:3])
    near = ratio <= _SERIES_RATIO
    est[near] = centre + s_wy[near] / s_w[near]
    swr[near] = s_w[near]
    rq[near] = np.maximum(s_wy2[near] - s_wy[near] ** 2 / s_w[near], 0.0)
    far = np.flatnonzero(~near)
    if far.size:
        mask = np.arange(k)[None, :] < sizes[far, None]
        e, sw_f, rq_f, _ = _pool_rows(y, v, mask, tau2[far], hksj=True, with_weights=False)
        est[far], swr[far], rq[far] = e, sw_f, rq_f
    random = _random_results(
        method,
        est,
        swr,
        rq,
        sizes,
        tau2,
        converged,
        tuple(notes),
        [()] * sizes.size,
        hksj,
        confidence_level,
    )
    return fixed, random
