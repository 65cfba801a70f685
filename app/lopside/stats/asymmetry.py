"""Small-study-effect (funnel-asymmetry) tests, each registered once.

Design invariants
-----------------
* A test is one public function ``f(data, *, alpha=0.10, **options)`` returning an
  :class:`AsymmetryResult` or :class:`~lopside.stats.results.NotComputable`, plus one
  :data:`REGISTRY` line naming the measures it suits, the data it needs and its published
  source. The window, CLI and sheet discover tests from the registry only.
* The arithmetic of every test lives in a batched ``*_core`` function that works on arrays
  whose last axis is the studies. The single-review path calls it with shape ``(k,)`` and
  the power simulation (:mod:`lopside.stats.power`) with shape ``(replicates, k)``, so both
  run exactly the same code. A study is set aside by giving it weight 0 (``use`` False).
* Regression tests estimate the residual variance from the data (multiplicative
  dispersion) and use a t test on k - 2 degrees of freedom (methods.md section 3); the
  Thompson-Sharp random-effects variant fixes the dispersion at 1 and uses a z test.
* Bad data never raise: they give ``NotComputable`` with a plain reason.

Formulas: /work/shared/methods.md sections 3.1-3.9.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from functools import lru_cache
from typing import NamedTuple

import numpy as np

from ..model.review import MEASURE_NAMES
from .data import StudyData
from .results import NotComputable

#: Conventional threshold for asymmetry tests: Egger et al. 1997 used P < 0.10 because the
#: tests have low power; Sterne et al. 2011 repeat it (from memory).
DEFAULT_ALPHA = 0.10

#: Largest k for which Begg's test uses the exact null distribution of Kendall's S.
BEGG_EXACT_MAX = 50

ALL_MEASURES = frozenset({"OR", "RR", "HR", "RD", "MD", "SMD"})

# Status codes shared by the batched cores (one per replicate).
OK, TOO_FEW, SINGULAR, EXACT_FIT = 0, 1, 2, 3
# Begg's test: a weight or standardised effect overflowed (numbers too extreme).
NUMERIC = 4

# A design is singular when the weighted spread of the regressor is this small relative
# to its weighted square (relative spread about 1e-6): the SEs are equal for all purposes.
_SINGULAR_TOL = 1e-12
# A fit is exact when the residual sum of squares is this small relative to the weighted
# square of the response (relative residual about 1e-10): there is no scatter to test.
_EXACT_TOL = 1e-20
# Formulations A and B of Egger's test are algebraically identical (methods.md 3.1);
# we require agreement to this relative tolerance before reporting.
_EGGER_AGREE_RTOL = 1e-6

# User-facing messages, declared once so that tests can assert them.
MSG_NEEDS_COUNTS = "{name} needs 2x2 counts (events and totals in both groups) for every study"
MSG_NEEDS_SIZES = "{name} needs the size of both groups for every study"
MSG_WRONG_MEASURE = "{name} is meant for {suits}; this analysis uses the {measure}"
MSG_TOO_FEW = "{name} needs at least 3 studies{qual}; {k_used} {verb} available{aside}"
MSG_SINGULAR = (
    "{name} cannot be computed: all studies have the same {what}, so there is no spread "
    "of study size to relate the effects to"
)
MSG_EXACT_FIT = (
    "{name} cannot be computed: the studies lie exactly on a straight line, so there is "
    "no scatter left to test against"
)
MSG_BEGG_FLAT = (
    "{name} cannot be computed: all standardised effects are equal, so they cannot be ranked"
)
MSG_NUMERIC = (
    "{name} cannot be computed: the effects or standard errors are too extreme for "
    "accurate arithmetic (check the entries for typing or unit errors)"
)
MSG_EGGER_DISAGREE = (
    "{name} cannot be computed reliably: two equivalent forms of the regression gave "
    "different answers (the standard errors are too extreme for accurate arithmetic)"
)


# --------------------------------------------------------------------------------------
# Results


@dataclass(frozen=True, slots=True)
class AsymmetryResult:
    """The outcome of one small-study-effect test.

    Attributes
    ----------
    key, name : str
        Registry key ("egger") and display name ("Egger's test").
    statistic : float
        The test statistic: a t (regression tests), a z (random-effects arcsine test) or
        Kendall's tau-b (Begg's test).
    pvalue : float
        Two-sided p-value.
    df : float or None
        Degrees of freedom of the t distribution, None for z or rank tests.
    intercept, intercept_se, slope, slope_se : float or None
        Fitted coefficients of the regression and their standard errors (None for Begg).
    k_used : int
        Studies that entered the test.
    dropped : tuple of (label, why)
        Studies set aside, with the reason in plain words.
    method_note : str
        How the p-value was obtained ("t test on 12 df", "exact p (no ties)").
    what_is_tested : str
        The quantity tested, in plain words.
    reading : str
        One plain-language line about this result.
    alpha : float
        Threshold used for the reading.
    tested : str
        Which quantity carries the test: "intercept", "slope" or "tau".
    bias : float
        The tested coefficient (or tau); positive means smaller studies show more positive
        effects on the analysis scale.
    z : float or None
        Begg's test: the normal deviate of Kendall's S (tie-corrected variance).
    tau2 : float or None
        Random-effects arcsine test: residual between-study variance (method of moments).
    """

    key: str
    name: str
    statistic: float
    pvalue: float
    df: float | None
    intercept: float | None
    intercept_se: float | None
    slope: float | None
    slope_se: float | None
    k_used: int
    dropped: tuple[tuple[str, str], ...]
    method_note: str
    what_is_tested: str
    reading: str
    alpha: float = DEFAULT_ALPHA
    tested: str = "intercept"
    bias: float = 0.0
    z: float | None = None
    tau2: float | None = None

    @property
    def suggests_asymmetry(self) -> bool:
        """True when ``pvalue < alpha``."""
        return self.pvalue < self.alpha


@dataclass(frozen=True)
class TestSpec:
    """One registered test.

    Attributes
    ----------
    key, name : str
    function : callable
        ``function(data, *, alpha=0.10, **options) -> AsymmetryResult | NotComputable``.
    suits : frozenset of str
        Measures the test is meant for.
    needs : str
        "se" (effects and SEs suffice), "counts" (2x2 counts for every study) or "sizes"
        (both group sizes for every study).
    source : str
        Published source.
    summary : str
        One line in plain language.
    """

    __test__ = False  # not a pytest class, despite the name

    key: str
    name: str
    function: Callable[..., AsymmetryResult | NotComputable]
    suits: frozenset[str]
    needs: str
    source: str
    summary: str


class TestArrays(NamedTuple):
    """Batched output of a ``*_core`` function (arrays over the leading axes)."""

    statistic: np.ndarray
    pvalue: np.ndarray
    df: np.ndarray | None
    status: np.ndarray
    k_used: np.ndarray
    bias: np.ndarray
    intercept: np.ndarray | None = None
    intercept_se: np.ndarray | None = None
    slope: np.ndarray | None = None
    slope_se: np.ndarray | None = None
    z: np.ndarray | None = None
    tau2: np.ndarray | None = None
    exact: np.ndarray | None = None
    ties: np.ndarray | None = None


class LineFit(NamedTuple):
    """Batched weighted least-squares fit of ``z = intercept + slope * x``."""

    intercept: np.ndarray
    intercept_se: np.ndarray
    slope: np.ndarray
    slope_se: np.ndarray
    df: np.ndarray
    k_used: np.ndarray
    rss: np.ndarray
    status: np.ndarray


# --------------------------------------------------------------------------------------
# Batched arithmetic


def _t_sf2(t, df):
    from scipy.special import stdtr

    return 2.0 * stdtr(df, -np.abs(t))


def _norm_sf2(z):
    from scipy.special import ndtr

    return 2.0 * ndtr(-np.abs(z))


def fit_line(x, z, w, *, scale: float | None = None) -> LineFit:
    """Weighted least squares of ``z`` on ``(1, x)``, batched over the leading axes.

    Parameters
    ----------
    x, z, w : array_like
        Regressor, response and weights; the last axis is the studies. Entries with
        ``w <= 0`` (or a non-finite ``w``, ``x`` or ``z``) are left out.
    scale : float, optional
        Fix the residual variance at this value (random-effects meta-regression); by
        default it is estimated as the weighted residual sum of squares over k - 2.

    Returns
    -------
    LineFit
        Coefficients, standard errors, residual df, studies used, weighted residual sum of
        squares and a status code (``OK``, ``TOO_FEW``, ``SINGULAR``, ``EXACT_FIT``).

    Notes
    -----
    Centred closed-form formulas (numerically stable for a two-parameter line):
    slope = Sxz / Sxx, Var(slope) = s² / Sxx, Var(intercept) = s² (1/Σw + x̄² / Sxx).
    """
    x, z, w = np.broadcast_arrays(
        np.asarray(x, dtype=float), np.asarray(z, dtype=float), np.asarray(w, dtype=float)
    )
    use = np.isfinite(w) & (w > 0) & np.isfinite(x) & np.isfinite(z)
    w = np.where(use, w, 0.0)
    x = np.where(use, x, 0.0)
    z = np.where(use, z, 0.0)
    k_used = use.sum(axis=-1)
    with np.errstate(divide="ignore", invalid="ignore"):
        sw = w.sum(axis=-1)
        xbar = (w * x).sum(axis=-1) / sw
        zbar = (w * z).sum(axis=-1) / sw
        dx = np.where(use, x - xbar[..., None], 0.0)
        dz = np.where(use, z - zbar[..., None], 0.0)
        sxx = (w * dx * dx).sum(axis=-1)
        slope = (w * dx * dz).sum(axis=-1) / sxx
        intercept = zbar - slope * xbar
        resid = dz - slope[..., None] * dx
        rss = (w * resid * resid).sum(axis=-1)
        df = k_used - 2
        s2 = rss / df if scale is None else np.full(rss.shape, float(scale))
        slope_se = np.sqrt(s2 / sxx)
        intercept_se = np.sqrt(s2 * (1.0 / sw + xbar**2 / sxx))
        singular = ~(sxx > _SINGULAR_TOL * (w * x * x).sum(axis=-1))
        exact = ~(rss > _EXACT_TOL * (w * z * z).sum(axis=-1))
    status = np.full(k_used.shape, OK)
    if scale is None:
        status = np.where(exact, EXACT_FIT, status)
    status = np.where(singular, SINGULAR, status)
    status = np.where(k_used < 3, TOO_FEW, status)
    return LineFit(intercept, intercept_se, slope, slope_se, df, k_used, rss, status)


def _t_test(fit: LineFit, which: str) -> TestArrays:
    coef = fit.intercept if which == "intercept" else fit.slope
    se = fit.intercept_se if which == "intercept" else fit.slope_se
    ok = fit.status == OK
    with np.errstate(divide="ignore", invalid="ignore"):
        t = np.where(ok, coef / se, np.nan)
        p = np.where(ok, _t_sf2(t, np.where(ok, fit.df, 1)), np.nan)
    return TestArrays(
        statistic=t,
        pvalue=p,
        df=fit.df.astype(float),
        status=fit.status,
        k_used=fit.k_used,
        bias=coef,
        intercept=fit.intercept,
        intercept_se=fit.intercept_se,
        slope=fit.slope,
        slope_se=fit.slope_se,
    )


def _finite_use(*arrays, use=None) -> np.ndarray:
    ok = np.ones(np.broadcast_shapes(*(np.shape(a) for a in arrays)), dtype=bool)
    for a in arrays:
        ok = ok & np.isfinite(a)
    if use is not None:
        ok = ok & np.asarray(use, dtype=bool)
    return ok


def egger_core(y, se, use=None) -> TestArrays:
    """Egger et al. 1997, formulation A: OLS of y/se on 1/se, intercept tested (t, k-2)."""
    y, se = np.asarray(y, dtype=float), np.asarray(se, dtype=float)
    ok = _finite_use(y, se, use=use) & (se > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        fit = fit_line(1.0 / se, y / se, ok.astype(float))
    return _t_test(fit, "intercept")


def egger_wls_core(y, se, use=None) -> TestArrays:
    """Egger's test, formulation B: WLS of y on se with weights 1/se², slope tested."""
    y, se = np.asarray(y, dtype=float), np.asarray(se, dtype=float)
    ok = _finite_use(y, se, use=use) & (se > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        fit = fit_line(se, y, np.where(ok, 1.0 / se**2, 0.0))
    return _t_test(fit, "slope")


def harbord_cells(a, b, c, d) -> tuple[np.ndarray, np.ndarray]:
    """Efficient score Z = a - n1 m1 / N and its variance V = n1 n0 m1 m0 / (N² (N - 1)).

    Harbord, Egger & Sterne 2006 (methods.md 3.3; the hypergeometric N²(N-1) denominator is
    from memory).
    """
    a, b, c, d = (np.asarray(x, dtype=float) for x in (a, b, c, d))
    n1, n0 = a + b, c + d
    n = n1 + n0
    m1, m0 = a + c, b + d
    with np.errstate(divide="ignore", invalid="ignore"):
        z = a - n1 * m1 / n
        v = n1 * n0 * m1 * m0 / (n**2 * (n - 1.0))
    return z, v


def harbord_core(a, b, c, d, use=None) -> TestArrays:
    """Harbord's modified test: OLS of Z/√V on √V, intercept tested (t, k-2); V = 0 left out."""
    z, v = harbord_cells(a, b, c, d)
    ok = _finite_use(z, v, use=use) & (v > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        sv = np.sqrt(v)
        fit = fit_line(sv, z / sv, ok.astype(float))
    return _t_test(fit, "intercept")


def peters_core(y, a, b, c, d, use=None) -> TestArrays:
    """Peters et al. 2006: WLS of y (log OR) on 1/N, weights m1 m0 / N, slope tested."""
    y = np.asarray(y, dtype=float)
    a, b, c, d = (np.asarray(x, dtype=float) for x in (a, b, c, d))
    n = a + b + c + d
    m1, m0 = a + c, b + d
    with np.errstate(divide="ignore", invalid="ignore"):
        # 1 / (1/m1 + 1/m0) = m1 m0 / N: zero when a study has no events or no non-events.
        w = m1 * m0 / n
        ok = _finite_use(y, w, use=use) & (w > 0)
        fit = fit_line(1.0 / n, y, np.where(ok, w, 0.0))
    return _t_test(fit, "slope")


def smd_modified_core(y, se_mod, use=None) -> TestArrays:
    """Pustejovsky & Rodgers 2019: WLS of g on sqrt(1/n1 + 1/n0), weights 1/that², slope."""
    y, sm = np.asarray(y, dtype=float), np.asarray(se_mod, dtype=float)
    ok = _finite_use(y, sm, use=use) & (sm > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        fit = fit_line(sm, y, np.where(ok, 1.0 / sm**2, 0.0))
    return _t_test(fit, "slope")


def arcsine_core(asd, asd_var, use=None, *, random: bool = False) -> TestArrays:
    """Rücker, Schwarzer & Carpenter 2008 arcsine test.

    ``random=False``: Egger-type WLS of the arcsine difference on its SE with weights
    1/var, slope tested with t on k-2 df (multiplicative dispersion).
    ``random=True``: Thompson & Sharp 1999 random-effects meta-regression of the arcsine
    difference on its SE: residual τ² by the method of moments,
    τ² = max(0, (Q_res - (k - 2)) / tr P) with P = W - W X (X'WX)⁻¹ X'W, then WLS with
    weights 1/(var + τ²) and dispersion fixed at 1; slope tested with a z test.
    """
    y, v = np.asarray(asd, dtype=float), np.asarray(asd_var, dtype=float)
    ok = _finite_use(y, v, use=use) & (v > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        s = np.sqrt(v)
        w = np.where(ok, 1.0 / v, 0.0)
        fe = fit_line(s, y, w)
        if not random:
            return _t_test(fe, "slope")
        # tr P for a two-column design, from the centred regressor (tr is invariant to
        # reparametrising the columns): tr P = Σw - Σw²/Σw - Σw²(x - x̄)² / Sxx.
        sw = w.sum(axis=-1)
        xs = np.where(ok, s, 0.0)
        xbar = (w * xs).sum(axis=-1) / sw
        dx = np.where(ok, xs - xbar[..., None], 0.0)
        sxx = (w * dx * dx).sum(axis=-1)
        trp = sw - (w * w).sum(axis=-1) / sw - (w * w * dx * dx).sum(axis=-1) / sxx
        tau2 = np.maximum(0.0, (fe.rss - (fe.k_used - 2)) / trp)
        wr = np.where(ok, 1.0 / (v + tau2[..., None]), 0.0)
        re = fit_line(s, y, wr, scale=1.0)
        status = np.where(fe.status == EXACT_FIT, OK, fe.status)  # exact fit: tau² = 0, fine
        status = np.where(re.status != OK, re.status, status)
        good = status == OK
        zstat = np.where(good, re.slope / re.slope_se, np.nan)
        p = np.where(good, _norm_sf2(zstat), np.nan)
    return TestArrays(
        statistic=zstat,
        pvalue=p,
        df=None,
        status=status,
        k_used=re.k_used,
        bias=re.slope,
        intercept=re.intercept,
        intercept_se=re.intercept_se,
        slope=re.slope,
        slope_se=re.slope_se,
        tau2=tau2,
    )


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
    order = np.lexsort((y, x))
    xs, ys = x[order], y[order]
    y_rank = np.unique(ys, return_inverse=True)[1].reshape(-1)
    dis = _count_inversions(y_rank)
    x_rank = np.unique(xs, return_inverse=True)[1].reshape(-1)
    both = x_rank.astype(np.int64) * (int(y_rank.max()) + 1) + y_rank
    xt = _tie_group_sums(xs)
    yt = _tie_group_sums(ys)
    bt = _tie_group_sums(both)
    s = n0 - xt[0] / 2.0 - yt[0] / 2.0 + bt[0] / 2.0 - 2.0 * dis
    return float(s), xt, yt


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


# --------------------------------------------------------------------------------------
# Helpers for the single-review path


def _name(key: str) -> str:
    return REGISTRY[key].name


def _suits_words(suits: frozenset[str]) -> str:
    order = ("OR", "RR", "RD", "HR", "MD", "SMD")
    words = [MEASURE_NAMES[m].split(" (")[0] + "s" for m in order if m in suits]
    if len(words) == 1:
        return words[0]
    return ", ".join(words[:-1]) + " and " + words[-1]


def _has_counts(data: StudyData) -> bool:
    k = data.k
    return k > 0 and all(
        x.size == k and bool(np.all(np.isfinite(x))) for x in (data.a, data.b, data.c, data.d)
    )


def _has_arm_sizes(data: StudyData) -> bool:
    k = data.k
    if k == 0:
        return False
    if data.se_modified.size == k and bool(np.all(np.isfinite(data.se_modified))):
        return True
    return all(
        x.size == k and bool(np.all(np.isfinite(x)) and np.all(x > 0)) for x in (data.n1, data.n0)
    )


def needs_met(needs: str, data: StudyData) -> bool:
    """Whether ``data`` provides what a test with these ``needs`` requires."""
    if needs == "counts":
        return _has_counts(data)
    if needs == "sizes":
        return _has_arm_sizes(data)
    return data.k > 0


def precheck(key: str, data: StudyData) -> NotComputable | None:
    """NotComputable when the measure or the available data do not allow test ``key``."""
    spec = REGISTRY[key]
    if data.measure not in spec.suits:
        return NotComputable(
            MSG_WRONG_MEASURE.format(
                name=spec.name,
                suits=_suits_words(spec.suits),
                measure=MEASURE_NAMES.get(data.measure, data.measure),
            )
        )
    if not needs_met(spec.needs, data):
        msg = MSG_NEEDS_COUNTS if spec.needs == "counts" else MSG_NEEDS_SIZES
        if spec.needs == "se":
            return NotComputable(
                MSG_TOO_FEW.format(name=spec.name, qual="", k_used=0, verb="are", aside="")
            )
        return NotComputable(msg.format(name=spec.name))
    return None


def _label(data: StudyData, i: int) -> str:
    return data.labels[i] if i < len(data.labels) and data.labels[i] else f"Study {i + 1}"


def _fe_direction(y, v) -> float:
    y, v = np.asarray(y, dtype=float), np.asarray(v, dtype=float)
    ok = np.isfinite(y) & np.isfinite(v) & (v > 0)
    if not ok.any():
        return 0.0
    w = 1.0 / v[ok]
    return float((w * y[ok]).sum() / w.sum())


def format_p(p: float, alpha: float = DEFAULT_ALPHA) -> str:
    """'p = 0.03', 'p = 0.004', 'p < 0.001'; never rounds across ``alpha``."""
    if p < 0.001:
        return "p < 0.001"
    if p < 0.01:
        return f"p = {p:.3f}"
    text = f"{p:.2f}"
    if (float(text) < alpha) != (p < alpha) or float(text) == alpha:
        text = f"{p:.3f}"
    return f"p = {text}"


def _reading(p: float, bias: float, pooled: float, alpha: float) -> str:
    ptxt = format_p(p, alpha)
    if not p < alpha:
        return f"no clear sign of small-study effects ({ptxt})"
    if pooled == 0.0 or bias == 0.0:
        side = "more positive" if bias > 0 else "more negative"
        return f"small studies show {side} effects than large ones ({ptxt})"
    if np.sign(bias) == np.sign(pooled):
        return f"small studies show larger effects than large ones ({ptxt})"
    return (
        "small studies show smaller effects than large ones, the reverse of the usual "
        f"pattern ({ptxt})"
    )


def _not_computable(
    key: str,
    status: int,
    k_used: int,
    what: str = "standard error",
    n_dropped: int = 0,
) -> NotComputable:
    name = _name(key)
    if status == TOO_FEW:
        verb = "is" if k_used == 1 else "are"
        qual = " with usable data" if n_dropped else ""
        aside = f" ({n_dropped} set aside)" if n_dropped else ""
        return NotComputable(
            MSG_TOO_FEW.format(name=name, qual=qual, k_used=k_used, verb=verb, aside=aside)
        )
    if status == SINGULAR:
        return NotComputable(MSG_SINGULAR.format(name=name, what=what))
    if status == NUMERIC:
        return NotComputable(MSG_NUMERIC.format(name=name))
    if key == "begg":
        return NotComputable(MSG_BEGG_FLAT.format(name=name))
    return NotComputable(MSG_EXACT_FIT.format(name=name))


def _f(x) -> float | None:
    return None if x is None else float(np.asarray(x))


def _wrap(
    key: str,
    arr: TestArrays,
    *,
    tested: str,
    dropped: tuple[tuple[str, str], ...],
    method_note: str,
    what: str,
    pooled: float,
    alpha: float,
    name: str | None = None,
) -> AsymmetryResult:
    p = float(arr.pvalue)
    bias = float(arr.bias)
    return AsymmetryResult(
        key=key,
        name=name or _name(key),
        statistic=float(arr.statistic),
        pvalue=p,
        df=_f(arr.df),
        intercept=_f(arr.intercept),
        intercept_se=_f(arr.intercept_se),
        slope=_f(arr.slope),
        slope_se=_f(arr.slope_se),
        k_used=int(arr.k_used),
        dropped=dropped,
        method_note=method_note,
        what_is_tested=what,
        reading=_reading(p, bias, pooled, alpha),
        alpha=alpha,
        tested=tested,
        bias=bias,
        z=_f(arr.z),
        tau2=_f(arr.tau2),
    )


def _dropped_nonfinite(data: StudyData, y, se) -> tuple[np.ndarray, list[tuple[str, str]]]:
    use = np.isfinite(y) & np.isfinite(se) & (se > 0)
    dropped = [
        (_label(data, i), "no usable effect or standard error") for i in np.flatnonzero(~use)
    ]
    return use, dropped


def _t_note(df) -> str:
    return f"t test on {int(df)} degrees of freedom (residual variance estimated)"


# --------------------------------------------------------------------------------------
# The tests


def egger(data: StudyData, *, alpha: float = DEFAULT_ALPHA) -> AsymmetryResult | NotComputable:
    """Egger's regression test (Egger et al. 1997), formulation A.

    Ordinary least squares of the standard normal deviate y/se on precision 1/se; the
    intercept is tested with a t on k - 2 df. Formulation B (:func:`egger_wls`) is computed
    too and must agree (methods.md 3.1).

    Parameters
    ----------
    data : StudyData
    alpha : float
        Threshold for the reading (0.10 by convention).

    Returns
    -------
    AsymmetryResult or NotComputable
    """
    pre = precheck("egger", data)
    if pre is not None:
        return pre
    use, dropped = _dropped_nonfinite(data, data.y, data.se)
    a = egger_core(data.y, data.se, use)
    if int(a.status) != OK:
        return _not_computable("egger", int(a.status), int(a.k_used), n_dropped=len(dropped))
    b = egger_wls_core(data.y, data.se, use)
    pairs = ((a.intercept, b.slope), (a.intercept_se, b.slope_se), (a.slope, b.intercept))
    if int(b.status) != OK or not all(
        np.isclose(float(p), float(q), rtol=_EGGER_AGREE_RTOL, atol=1e-12) for p, q in pairs
    ):
        return NotComputable(MSG_EGGER_DISAGREE.format(name=_name("egger")))
    return _wrap(
        "egger",
        a,
        tested="intercept",
        dropped=tuple(dropped),
        method_note=_t_note(a.df),
        what="intercept of the standard normal deviate (effect / SE) regressed on precision "
        "(1 / SE)",
        pooled=_fe_direction(data.y, data.v),
        alpha=alpha,
    )


def egger_wls(data: StudyData, *, alpha: float = DEFAULT_ALPHA) -> AsymmetryResult | NotComputable:
    """Egger's test, formulation B: weighted regression of the effect on its SE.

    Weighted least squares of y on se with weights 1/se²; the slope is tested (t, k - 2 df).
    Its slope equals the intercept of formulation A and its intercept A's slope.

    Parameters
    ----------
    data : StudyData
    alpha : float

    Returns
    -------
    AsymmetryResult or NotComputable
    """
    pre = precheck("egger", data)
    if pre is not None:
        return pre
    use, dropped = _dropped_nonfinite(data, data.y, data.se)
    b = egger_wls_core(data.y, data.se, use)
    if int(b.status) != OK:
        return _not_computable("egger", int(b.status), int(b.k_used), n_dropped=len(dropped))
    return _wrap(
        "egger",
        b,
        tested="slope",
        dropped=tuple(dropped),
        method_note=_t_note(b.df) + "; weighted regression of the effect on its SE",
        what="slope of the effect regressed on its SE, weighted by 1 / SE²",
        pooled=_fe_direction(data.y, data.v),
        alpha=alpha,
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


def _count_drop_reasons(data: StudyData, keep: np.ndarray) -> list[tuple[str, str]]:
    m1 = data.a + data.c
    m0 = data.b + data.d
    out = []
    for i in np.flatnonzero(~keep):
        if m1[i] == 0:
            why = "no events in either group"
        elif m0[i] == 0:
            why = "every participant had the event in both groups"
        else:
            why = "counts do not allow the calculation"
        out.append((_label(data, i), why))
    return out


def harbord(data: StudyData, *, alpha: float = DEFAULT_ALPHA) -> AsymmetryResult | NotComputable:
    """Harbord, Egger & Sterne 2006 modified test for odds ratios.

    Z = a - n1 m1 / N (efficient score), V = n1 n0 m1 m0 / (N² (N - 1)); ordinary least
    squares of Z/√V on √V, intercept tested with a t on k - 2 df. Single zero cells need no
    correction; studies with V = 0 (no events, or only events, in both groups) are set
    aside with the reason.

    Parameters
    ----------
    data : StudyData
    alpha : float

    Returns
    -------
    AsymmetryResult or NotComputable
    """
    pre = precheck("harbord", data)
    if pre is not None:
        return pre
    z, v = harbord_cells(data.a, data.b, data.c, data.d)
    keep = np.isfinite(z) & np.isfinite(v) & (v > 0)
    r = harbord_core(data.a, data.b, data.c, data.d)
    dropped = _count_drop_reasons(data, keep)
    if int(r.status) != OK:
        return _not_computable(
            "harbord", int(r.status), int(r.k_used), "score variance", len(dropped)
        )
    return _wrap(
        "harbord",
        r,
        tested="intercept",
        dropped=tuple(dropped),
        method_note=_t_note(r.df),
        what="intercept of the efficient score over its standard deviation (Z / √V) "
        "regressed on √V",
        pooled=_fe_direction(data.y, data.v),
        alpha=alpha,
    )


def peters(data: StudyData, *, alpha: float = DEFAULT_ALPHA) -> AsymmetryResult | NotComputable:
    """Peters et al. 2006 regression test.

    Weighted least squares of the log odds ratio (``data.y``) on 1/N with weights
    1/(1/m1 + 1/m0), where m1 = a + c (all events) and m0 = b + d (all non-events); the
    slope is tested with a t on k - 2 df. Studies without events (or without non-events)
    are set aside. Designed for odds ratios; run on risk ratios it is exploratory.

    Parameters
    ----------
    data : StudyData
    alpha : float

    Returns
    -------
    AsymmetryResult or NotComputable
    """
    pre = precheck("peters", data)
    if pre is not None:
        return pre
    m1 = data.a + data.c
    m0 = data.b + data.d
    keep = (m1 > 0) & (m0 > 0)
    dropped = _count_drop_reasons(data, keep)
    bad_y = keep & ~np.isfinite(data.y)
    dropped += [(_label(data, i), "no usable effect") for i in np.flatnonzero(bad_y)]
    keep &= np.isfinite(data.y)
    r = peters_core(data.y, data.a, data.b, data.c, data.d, keep)
    if int(r.status) != OK:
        return _not_computable(
            "peters", int(r.status), int(r.k_used), "total sample size", len(dropped)
        )
    note = _t_note(r.df)
    if data.measure != "OR":
        note += "; exploratory: the test was designed for odds ratios (Peters et al. 2006)"
    scale = "log odds ratio" if data.measure == "OR" else "log risk ratio"
    return _wrap(
        "peters",
        r,
        tested="slope",
        dropped=tuple(dropped),
        method_note=note,
        what=f"slope of the {scale} regressed on 1 / total sample size, weighted by events "
        "and non-events",
        pooled=_fe_direction(data.y, data.v),
        alpha=alpha,
    )


def _se_modified(data: StudyData) -> np.ndarray:
    k = data.k
    if data.se_modified.size == k and bool(np.all(np.isfinite(data.se_modified))):
        return data.se_modified
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.sqrt(1.0 / data.n1 + 1.0 / data.n0)


def smd_modified(
    data: StudyData, *, alpha: float = DEFAULT_ALPHA
) -> AsymmetryResult | NotComputable:
    """Egger-type test for SMDs with the modified SE (Pustejovsky & Rodgers 2019).

    Weighted least squares of g on W = √(1/n1 + 1/n0) with weights 1/W²; the slope on W is
    tested with a t on k - 2 df (the equivalent of Egger's intercept). W does not contain
    g, which removes the artefactual link between an SMD and its usual SE.

    Parameters
    ----------
    data : StudyData
    alpha : float

    Returns
    -------
    AsymmetryResult or NotComputable
    """
    pre = precheck("smd_modified", data)
    if pre is not None:
        return pre
    sm = _se_modified(data)
    use, dropped = _dropped_nonfinite(data, data.y, sm)
    r = smd_modified_core(data.y, sm, use)
    if int(r.status) != OK:
        return _not_computable(
            "smd_modified", int(r.status), int(r.k_used), "group sizes", len(dropped)
        )
    return _wrap(
        "smd_modified",
        r,
        tested="slope",
        dropped=tuple(dropped),
        method_note=_t_note(r.df),
        what="slope of the SMD regressed on √(1/n₁ + 1/n₀), weighted by its inverse square",
        pooled=_fe_direction(data.y, data.v),
        alpha=alpha,
    )


def arcsine_arrays(data: StudyData) -> tuple[np.ndarray, np.ndarray]:
    """Arcsine difference and its variance: from ``data`` where present, else from counts.

    ASD = arcsin√(a/n1) - arcsin√(c/n0), Var = 1/(4 n1) + 1/(4 n0) (Rücker et al. 2008).
    """
    k = data.k
    if (
        data.asd.size == k
        and data.asd_var.size == k
        and bool(np.all(np.isfinite(data.asd)) and np.all(np.isfinite(data.asd_var)))
    ):
        return data.asd, data.asd_var
    n1 = data.a + data.b
    n0 = data.c + data.d
    with np.errstate(divide="ignore", invalid="ignore"):
        asd = np.arcsin(np.sqrt(data.a / n1)) - np.arcsin(np.sqrt(data.c / n0))
        var = 1.0 / (4.0 * n1) + 1.0 / (4.0 * n0)
    return asd, var


def arcsine(
    data: StudyData, *, alpha: float = DEFAULT_ALPHA, random: bool = False
) -> AsymmetryResult | NotComputable:
    """Arcsine test (Rücker, Schwarzer & Carpenter 2008).

    ``random=False``: Egger-type weighted regression of the arcsine difference on its SE
    (weights 1/var), slope tested with t on k - 2 df. ``random=True``: the Thompson & Sharp
    1999 version with additive between-study variance (random-effects meta-regression,
    method-of-moments τ²), slope tested with a z test. The variance depends on the group
    sizes only, and double-zero trials are usable.

    Parameters
    ----------
    data : StudyData
    alpha : float
    random : bool
        Use the random-effects (Thompson-Sharp) version.

    Returns
    -------
    AsymmetryResult or NotComputable
    """
    pre = precheck("arcsine", data)
    if pre is not None:
        return pre
    asd, var = arcsine_arrays(data)
    use, dropped = _dropped_nonfinite(data, asd, var)
    r = arcsine_core(asd, var, use, random=random)
    if int(r.status) != OK:
        return _not_computable("arcsine", int(r.status), int(r.k_used), "group sizes", len(dropped))
    if random:
        note = (
            "z test in a random-effects meta-regression (Thompson & Sharp 1999), "
            f"between-study variance by the method of moments: τ² = {float(r.tau2):.4g}"
        )
        what = (
            "slope of the arcsine difference regressed on its SE, allowing for "
            "between-study variance"
        )
        name = "Arcsine test (random effects)"
    else:
        note = _t_note(r.df)
        what = "slope of the arcsine difference regressed on its SE, weighted by 1 / SE²"
        name = None
    return _wrap(
        "arcsine",
        r,
        tested="slope",
        dropped=tuple(dropped),
        method_note=note,
        what=what,
        pooled=_fe_direction(asd, var),
        alpha=alpha,
        name=name,
    )


# --------------------------------------------------------------------------------------
# Registry

REGISTRY: dict[str, TestSpec] = {
    spec.key: spec
    for spec in (
        TestSpec(
            "egger",
            "Egger's test",
            egger,
            ALL_MEASURES,
            "se",
            "Egger M, Davey Smith G, Schneider M, Minder C. BMJ 1997;315:629-34",
            "Do smaller studies sit further from the pooled effect than their precision allows?",
        ),
        TestSpec(
            "begg",
            "Begg's rank test",
            begg,
            ALL_MEASURES,
            "se",
            "Begg CB, Mazumdar M. Biometrics 1994;50:1088-101",
            "Do study effects rise or fall in rank with their variance?",
        ),
        TestSpec(
            "harbord",
            "Harbord's test",
            harbord,
            frozenset({"OR"}),
            "counts",
            "Harbord RM, Egger M, Sterne JAC. Stat Med 2006;25:3443-57",
            "Egger-type test built on the score statistic, for odds ratios from 2x2 counts.",
        ),
        TestSpec(
            "peters",
            "Peters' test",
            peters,
            frozenset({"OR", "RR"}),
            "counts",
            "Peters JL, Sutton AJ, Jones DR, Abrams KR, Rushton L. JAMA 2006;295:676-80",
            "Do odds ratios change with study size (1 / total sample size)?",
        ),
        TestSpec(
            "smd_modified",
            "Egger's test with modified SE",
            smd_modified,
            frozenset({"SMD"}),
            "sizes",
            "Pustejovsky JE, Rodgers MA. Res Synth Methods 2019;10:57-71",
            "Egger-type test for SMDs using a precision based on group sizes only.",
        ),
        TestSpec(
            "arcsine",
            "Arcsine test",
            arcsine,
            frozenset({"OR", "RR", "RD"}),
            "counts",
            "Rücker G, Schwarzer G, Carpenter J. Stat Med 2008;27:746-63",
            "Egger-type test on the arcsine difference, whose SE depends on group sizes only.",
        ),
    )
}


def run_test(key: str, data: StudyData, **kw) -> AsymmetryResult | NotComputable:
    """Run the registered test ``key`` on ``data``.

    Parameters
    ----------
    key : str
        A key of :data:`REGISTRY`.
    data : StudyData
    **kw
        Passed to the test function (``alpha``, ``random`` for "arcsine", ...).

    Returns
    -------
    AsymmetryResult or NotComputable

    Raises
    ------
    ValueError
        For an unknown key (a programming error, not bad data).
    """
    if key not in REGISTRY:
        raise ValueError(f"unknown asymmetry test {key!r}; known: {sorted(REGISTRY)}")
    try:
        return REGISTRY[key].function(data, **kw)
    except (ArithmeticError, IndexError, ValueError, np.linalg.LinAlgError) as exc:
        # A numerical failure in one test must not take the whole analysis down with it
        # (run_all is called outside the analysis' own safety net); the tests of
        # tests/test_edge_numerics.py check that this is not the normal path.
        return NotComputable(
            f"{_name(key)} could not be computed for these data (the numbers are too "
            f"extreme for accurate arithmetic: {type(exc).__name__})"
        )


def run_all(
    data: StudyData,
    *,
    alpha: float = DEFAULT_ALPHA,
    options: dict[str, dict] | None = None,
) -> dict[str, AsymmetryResult | NotComputable]:
    """Run every registered test; tests the data cannot support give NotComputable.

    Parameters
    ----------
    data : StudyData
    alpha : float
    options : dict, optional
        Extra keyword arguments per test key, e.g. ``{"arcsine": {"random": True}}``.

    Returns
    -------
    dict
        Registry key -> result, in registry order.
    """
    options = options or {}
    return {key: run_test(key, data, alpha=alpha, **options.get(key, {})) for key in REGISTRY}
