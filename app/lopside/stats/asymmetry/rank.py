"""The rank family: Begg and Mazumdar's test (Kendall's tau between standardised effects
and variances), exact null distribution up to :data:`BEGG_EXACT_MAX` studies, ties
handled, S counted by sorting for large k. Formulas:
methods.md section 3.
"""

from __future__ import annotations

import math
from functools import lru_cache

import numpy as np

from lopside.stats.asymmetry.base import (
    BEGG_EXACT_MAX,
    DEFAULT_ALPHA,
    EXACT_FIT,
    NUMERIC,
    OK,
    SINGULAR,
    TOO_FEW,
    AsymmetryResult,
    TestArrays,
    _finite_use,
    _norm_sf2,
)
from lopside.stats.asymmetry.single import (
    _dropped_nonfinite,
    _fe_direction,
    _not_computable,
    _wrap,
    precheck,
)
from lopside.stats.data import StudyData
from lopside.stats.results import NotComputable


@lru_cache(maxsize=64)
def kendall_exact_cdf(n: int) -> np.ndarray:
    """Null distribution of the number of discordant pairs among ``n`` untied pairs.

    Returns ``cdf`` with ``cdf[q] = P(D <= q)``, q = 0 .. n(n-1)/2, computed exactly with
    integers by the standard recursion for permutations with q inversions (Mahonian
    numbers): f(m, q) = Σ_{j=0}^{min(q, m-1)} f(m-1, q-j) (common practice).
    """
    counts = [1]
    for m in range(2, n + 1):
        size = len(counts) + m - 1
        prefix = [0]
        for x in counts:
            prefix.append(prefix[-1] + x)
        new = []
        for q in range(size):
            hi = min(q, len(counts) - 1)
            lo = q - (m - 1)
            new.append(prefix[hi + 1] - (prefix[lo] if lo > 0 else 0))
        counts = new
    total = math.factorial(n)
    running = 0
    cdf = np.empty(len(counts))
    for i, x in enumerate(counts):
        running += x
        cdf[i] = running / total  # exact integer ratio, correctly rounded
    cdf.flags.writeable = False  # cached: shared between callers
    return cdf


#: largest k whose pair layout is cached (a few hundred thousand pairs at most); larger
#: single reviews go through :func:`_kendall_sorted`, which needs no pairs at all
_PAIRS_CACHE_MAX = 400


#: single reviews with more studies than this count S by sorting (O(k log k))
_BEGG_SORT_MIN = 64


def _pairs(k: int):
    """Index pairs i < j of k entries, and the layout needed to count pairs per entry.

    Cached only for small k, so that no cache grows with the size of a review."""
    if k <= _PAIRS_CACHE_MAX:
        return _pairs_cached(k)
    return _pairs_build(k)


@lru_cache(maxsize=32)
def _pairs_cached(k: int):
    return _pairs_build(k)


def _pairs_build(k: int):
    i0, i1 = np.triu_indices(k, 1)
    order1 = np.argsort(i1, kind="stable")
    starts0 = np.searchsorted(i0, np.arange(k - 1))  # i0 = 0..k-2 each own >= 1 pair
    starts1 = np.searchsorted(i1[order1], np.arange(1, k))  # i1 = 1..k-1 likewise
    out = (i0, i1, order1, starts0, starts1)
    for arr in out:
        arr.flags.writeable = False  # cached: shared between callers
    return out


def _per_entry(pairs_flag, k: int) -> np.ndarray:
    """For each entry, the number of pairs (i < j) it belongs to that are flagged."""
    _, _, order1, starts0, starts1 = _pairs(k)
    f = pairs_flag.astype(float)
    out = np.zeros((*f.shape[:-1], k))
    if k < 2:
        return out
    out[..., : k - 1] += np.add.reduceat(f, starts0, axis=-1)
    out[..., 1:] += np.add.reduceat(f[..., order1], starts1, axis=-1)
    return out


def _tie_sums(tied_pairs, k: int):
    """Σ over tie groups of t(t-1), t(t-1)(2t+5) and t(t-1)(t-2).

    Each entry's group size g is 1 + its tied partners; a group of size t has t entries,
    so Σ_entries (g - 1) = Σ_groups t(t - 1), and likewise for the other two sums.
    """
    n_tied = tied_pairs.sum(axis=-1)
    s0 = 2.0 * n_tied  # each tied pair counts once for each of its two entries
    s1 = np.zeros(n_tied.shape)
    s2 = np.zeros(n_tied.shape)
    rows = n_tied > 0
    if np.any(rows):  # group sizes only where ties exist (rare for continuous data)
        g1 = _per_entry(tied_pairs[rows], k)  # g - 1
        s1[rows] = (g1 * (2.0 * g1 + 7.0)).sum(axis=-1)
        s2[rows] = (g1 * (g1 - 1.0)).sum(axis=-1)
    return s0, s1, s2


def _sum_of_others(x: np.ndarray) -> np.ndarray:
    """For each position of the last axis, the sum of the other entries.

    Taken as (sum before) + (sum after) rather than total - own, so that one entry much
    larger than the rest does not wipe out the others by cancellation.
    """
    zero = np.zeros(x.shape[:-1] + (1,))
    before = np.concatenate([zero, np.cumsum(x, axis=-1)[..., :-1]], axis=-1)
    after = np.concatenate([np.cumsum(x[..., ::-1], axis=-1)[..., ::-1][..., 1:], zero], axis=-1)
    return before + after


def _tie_group_sums(x: np.ndarray) -> tuple[float, float, float]:
    """Σ over groups of equal values of t(t-1), t(t-1)(2t+5) and t(t-1)(t-2).

    The same integers as :func:`_tie_sums` forms from pairs, from the group sizes."""
    _, counts = np.unique(x, return_counts=True)
    t = counts[counts > 1].astype(float)
    return (
        float((t * (t - 1.0)).sum()),
        float((t * (t - 1.0) * (2.0 * t + 5.0)).sum()),
        float((t * (t - 1.0) * (t - 2.0)).sum()),
    )


def _count_inversions(r: np.ndarray) -> int:
    """Pairs i < j with r[i] > r[j] (strictly), for integer ranks r: bottom-up merge levels.

    At each level the entries form blocks of width 2w; within a block, every entry of the
    right half is compared with the sorted left half by one vectorised search, so the
    whole count costs O(k log² k) with no loop over entries.
    """
    n = r.size
    if n < 2:
        return 0
    r = r.astype(np.int64)
    span = int(r.max()) + 2
    pos = np.arange(n)
    total = 0
    w = 1
    while w < n:
        block = pos // (2 * w)
        right = (pos % (2 * w)) >= w
        key = block * span + r
        left_sorted = np.sort(key[~right])
        rk = key[right]
        rb = block[right]
        # entries of the same block's left half that are greater than each right entry
        end_of_left = np.searchsorted(left_sorted, (rb + 1) * span, side="left")
        above = np.searchsorted(left_sorted, rk, side="right")
        total += int((end_of_left - above).sum())
        w *= 2
    return total


def _kendall_sorted(x: np.ndarray, y: np.ndarray):
    """Kendall's S and the tie sums of x and y, by sorting instead of forming pairs.

    S = n0 - (pairs tied in x) - (pairs tied in y) + (pairs tied in both) - 2 (discordant
    pairs), with the discordant pairs counted as inversions of y after sorting by (x, y)
    (Knight 1966). All counts are integers, so S and the tie sums are exactly those the
    pairwise count gives.
    """
    n = x.size
    n0 = n * (n - 1) // 2
    xt = _tie_group_sums(x)
    yt = _tie_group_sums(y)
    s = _s_from_tau_b(x, y, n0 - xt[0] / 2.0, n0 - yt[0] / 2.0)
    if s is not None:
        return s, xt, yt
    order = np.lexsort((y, x))
    xs, ys = x[order], y[order]
    y_rank = np.unique(ys, return_inverse=True)[1].reshape(-1)
    dis = _count_inversions(y_rank)
    x_rank = np.unique(xs, return_inverse=True)[1].reshape(-1)
    both = x_rank.astype(np.int64) * (int(y_rank.max()) + 1) + y_rank
    bt = _tie_group_sums(both)
    s = n0 - xt[0] / 2.0 - yt[0] / 2.0 + bt[0] / 2.0 - 2.0 * dis
    return float(s), xt, yt


def _s_from_tau_b(x: np.ndarray, y: np.ndarray, untied_x: float, untied_y: float):
    """Kendall's S from scipy's tau-b (None when it is not defined or S not recovered).

    tau-b = S / sqrt(untied_x untied_y) (the pairs not tied in x, in y); S is an integer
    and scipy's count (a merge sort in compiled code) carries it to a few ulps, so
    rounding S = tau-b sqrt(untied_x untied_y) gives it exactly (|S| <= k(k-1)/2; an
    error of 0.5 would need k near 10^7). Its count is about five times quicker than
    :func:`_count_inversions`.
    """
    from scipy.stats import kendalltau

    if untied_x <= 0 or untied_y <= 0:
        return None
    tau = float(kendalltau(x, y, method="asymptotic").statistic)
    if not math.isfinite(tau):
        return None
    scaled = tau * math.sqrt(untied_x) * math.sqrt(untied_y)
    s = float(round(scaled))
    return s if abs(scaled - s) < 1e-3 else None


def _begg_single_sorted(tstar: np.ndarray, vv: np.ndarray, ok: np.ndarray):
    """(s, x tie sums, y tie sums) of one review, or None when the pairwise path must run."""
    if tstar.ndim != 1 or tstar.size <= _BEGG_SORT_MIN:
        return None
    x, y = tstar[ok], vv[ok]
    if not (np.all(np.isfinite(x)) and np.all(np.isfinite(y))):
        return None
    return _kendall_sorted(x, y)


def begg_core(y, v, use=None, *, exact_max: int = BEGG_EXACT_MAX) -> TestArrays:
    """Begg & Mazumdar 1994 rank correlation test, batched.

    t*_i = (y_i - θ_FE) / √(v_i - 1/Σw); Kendall's S between t* and v. Reports tau-b;
    exact p from the null distribution of S when there are no ties and k <= ``exact_max``,
    otherwise the normal approximation with the tie-corrected variance of S.
    """
    y, v = np.asarray(y, dtype=float), np.asarray(v, dtype=float)
    y, v = np.broadcast_arrays(y, v)
    k = y.shape[-1]
    ok = _finite_use(y, v, use=use) & (v > 0)
    k_used = ok.sum(axis=-1)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        w = np.where(ok, 1.0 / v, 0.0)
        wy = w * np.where(ok, y, 0.0)
        sw = w.sum(axis=-1)
        theta = wy.sum(axis=-1) / sw
        tstar = np.where(ok, (y - theta[..., None]) / np.sqrt(v - 1.0 / sw[..., None]), 0.0)
        # v_i - 1/Σw cancels catastrophically when one study carries nearly all the weight
        # (SEs of 1e-8 beside 1e4 make it zero or negative). For such a study t* is taken
        # in the algebraically equal form (y_i - θ_(-i)) / √(v_i + 1/W_(-i)), with θ_(-i)
        # and W_(-i) the fixed-effect mean and total weight of the other studies, summed
        # from both ends so that the big weight never enters. Elsewhere the textbook form
        # is kept, so that identical studies still give bit-identical (tied) t*.
        heavy = ok & (w > (1.0 - 1e-6) * sw[..., None])
        if np.any(heavy):
            w_other = _sum_of_others(w)
            theta_other = _sum_of_others(wy) / w_other
            stable = (y - theta_other) / np.sqrt(v + 1.0 / w_other)
            tstar = np.where(heavy, stable, tstar)
    vv = np.where(ok, v, 0.0)
    sorted_counts = _begg_single_sorted(tstar, vv, ok)
    if sorted_counts is not None:
        s, (xt0, xt1, xt2), (yt0, yt1, yt2) = (
            np.float64(sorted_counts[0]),
            tuple(np.float64(t) for t in sorted_counts[1]),
            tuple(np.float64(t) for t in sorted_counts[2]),
        )
    else:
        i0, i1 = _pairs(k)[:2]
        pair_use = ok[..., i0] & ok[..., i1]
        dt = np.sign(tstar[..., i0] - tstar[..., i1])
        dv = np.sign(vv[..., i0] - vv[..., i1])
        s = np.where(pair_use, dt * dv, 0.0).sum(axis=-1)
        xt0, xt1, xt2 = _tie_sums(pair_use & (dt == 0), k)
        yt0, yt1, yt2 = _tie_sums(pair_use & (dv == 0), k)
    n = k_used.astype(float)
    n0 = n * (n - 1.0) / 2.0
    with np.errstate(divide="ignore", invalid="ignore"):
        # tie-corrected variance of S (Kendall 1970; as in scipy.stats.kendalltau)
        var_s = (
            (n * (n - 1.0) * (2.0 * n + 5.0) - xt1 - yt1) / 18.0
            + xt2 * yt2 / (9.0 * n * (n - 1.0) * (n - 2.0))
            + xt0 * yt0 / (2.0 * n * (n - 1.0))
        )
        tau = s / np.sqrt((n0 - xt0 / 2.0) * (n0 - yt0 / 2.0))
        z = s / np.sqrt(var_s)
    status = np.full(k_used.shape, OK)
    status = np.where(xt0 / 2.0 >= n0, EXACT_FIT, status)  # all t* equal
    status = np.where(yt0 / 2.0 >= n0, SINGULAR, status)  # all variances equal
    # numbers too extreme for the arithmetic (an overflowing weight or t*)
    status = np.where(np.all(np.isfinite(tstar), axis=-1), status, NUMERIC)
    status = np.where(k_used < 3, TOO_FEW, status)
    good = status == OK
    ties = (xt0 > 0) | (yt0 > 0)
    exact = good & ~ties & (k_used <= exact_max)
    p = np.where(good, _norm_sf2(np.where(good, z, 0.0)), np.nan)
    if np.any(exact):
        p = np.array(p, dtype=float, copy=True)
        s_arr = np.broadcast_to(s, k_used.shape)
        for m in np.unique(k_used[exact]):
            sel = exact & (k_used == m)
            cdf = kendall_exact_cdf(int(m))
            pairs = m * (m - 1) // 2
            dis = np.rint((pairs - s_arr[sel]) / 2.0).astype(int)
            c = np.minimum(dis, pairs - dis)
            p[sel] = np.minimum(1.0, 2.0 * cdf[c])
    return TestArrays(
        statistic=np.where(good, tau, np.nan),
        pvalue=p,
        df=None,
        status=status,
        k_used=k_used,
        bias=np.where(good, tau, np.nan),
        z=np.where(good, z, np.nan),
        exact=exact,
        ties=ties,
    )


def begg(
    data: StudyData, *, alpha: float = DEFAULT_ALPHA, exact_max: int = BEGG_EXACT_MAX
) -> AsymmetryResult | NotComputable:
    """Begg & Mazumdar 1994 rank correlation test.

    Kendall's tau between the standardised deviates t* = (y - θ_FE)/√(v - 1/Σw) and the
    variances v. ``statistic`` is tau-b, ``z`` the normal deviate of S with the
    tie-corrected variance; the p-value is exact (null distribution of S) when there are
    no ties and k <= ``exact_max``, otherwise from the normal approximation.

    Parameters
    ----------
    data : StudyData
    alpha : float
    exact_max : int
        Largest number of studies for the exact p-value.

    Returns
    -------
    AsymmetryResult or NotComputable
    """
    pre = precheck("begg", data)
    if pre is not None:
        return pre
    use, dropped = _dropped_nonfinite(data, data.y, data.se)
    r = begg_core(data.y, data.v, use, exact_max=exact_max)
    if int(r.status) != OK:
        return _not_computable("begg", int(r.status), int(r.k_used), n_dropped=len(dropped))
    if bool(r.exact):
        note = "exact p (no ties)"
    elif bool(r.ties):
        note = "normal approximation with tie correction"
    else:
        note = f"normal approximation (more than {exact_max} studies)"
    return _wrap(
        "begg",
        r,
        tested="tau",
        dropped=tuple(dropped),
        method_note=note,
        what="rank correlation (Kendall's tau) between standardised effects and their variances",
        pooled=_fe_direction(data.y, data.v),
        alpha=alpha,
    )
