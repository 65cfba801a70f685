"""Many subsets of the same studies pooled at once: leave-one-out and cumulative analyses
(the note below says how).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from itertools import repeat

import numpy as np

from lopside.stats.pooling_base import _as_arrays, _norm_ppf
from lopside.stats.tau2 import (
    _GRID_UNIT,
    _MAX_ITER,
    _SCORING_ITER,
    _TOL,
    TAU2_METHODS,
    Tau2Estimate,
    tau2_pm,
    tau2_reml,
)

from .results import ConfidenceInterval, NotComputable, PooledEstimate, instances

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
def tau2_reml_batch(y, v, mask, *, max_iter: int = _MAX_ITER, grid: bool = True) -> Tau2Batch:
    """:func:`tau2_reml` of each subset (the global maximiser, with the same safeguard).

    Parameters
    ----------
    y, v : array_like
        Effects and within-study variances of all studies (k).
    mask : array_like of bool, shape (B, k)
        Row b selects the studies of subset b.
    max_iter : int
        Cap on the scoring iterations, as in :func:`tau2_reml`.
    grid : bool
        Check each scoring result against the safeguard grid of :func:`tau2_reml` (the
        default). False keeps the scoring result of rows that converged without that
        search for a higher maximum (much faster for many long rows; a caller that
        chooses it must say so in its result).

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
    if good.size and grid:
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


def tau2_batch(y, v, mask, method: str, *, reml_grid: bool = True) -> Tau2Batch:
    """:func:`estimate_tau2` of each subset (``reml_grid``: see :func:`tau2_reml_batch`)."""
    if method == "DL":
        return tau2_dl_batch(y, v, mask)
    if method == "PM":
        return tau2_pm_batch(y, v, mask)
    if method == "REML":
        return tau2_reml_batch(y, v, mask, grid=reml_grid)
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


def _intervals(lo: list, hi: list) -> list:
    """ConfidenceInterval per row (the named tuple without its Python ``__new__``)."""
    return list(map(tuple.__new__, repeat(ConfidenceInterval), zip(lo, hi)))


_EMPTY = "no study has a usable effect and standard error"


def _with_empty_rows(objs: list, n: list) -> tuple:
    """Rows of no study replaced by NotComputable."""
    if 0 in n:
        objs = [NotComputable(_EMPTY) if nb == 0 else o for o, nb in zip(objs, n)]
    return tuple(objs)


def _fixed_results(est, sw, n, weights, confidence_level):
    """PooledEstimate per row from the estimate and sum of weights of each subset.

    The arithmetic is done on whole arrays (the same operations as the scalar code, so the
    same numbers) and the rows are built from Python lists by :func:`instances`: at
    k = 3,000 indexing arrays element by element, or the dataclass ``__init__``, cost more
    than the pooling itself.
    """
    from scipy.special import ndtr

    se = 1.0 / np.sqrt(sw)
    stat = est / se
    p = 2.0 * ndtr(-np.abs(stat))
    z = _norm_ppf(0.5 + confidence_level / 2.0)
    ci = _intervals((est - z * se).tolist(), (est + z * se).tolist())
    n_l = [int(x) for x in n.tolist()]
    objs = instances(
        PooledEstimate,
        repeat("FE-IV"),
        est.tolist(),
        se.tolist(),
        ci,
        stat.tolist(),
        p.tolist(),
        repeat(confidence_level),
        repeat(0.0),
        repeat(None),
        repeat(False),
        n_l,
        repeat(None),
        weights,
        repeat(True),
        repeat(""),
    )
    return _with_empty_rows(objs, n_l)


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
    reml_grid: bool = True,
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
    reml_grid : bool
        As ``grid`` in :func:`tau2_reml_batch` (REML only).

    Returns
    -------
    tuple of PooledEstimate or NotComputable
    """
    y, v, mask = _batch_arrays(y, v, mask)
    nsub = mask.shape[0]
    n = mask.sum(axis=1)
    if tau2 is None:
        t2 = tau2_batch(y, v, mask, method, reml_grid=reml_grid)
        tau2_arr, converged, notes = t2.tau2, t2.converged, t2.notes
    else:
        tau2_arr = np.broadcast_to(np.asarray(tau2, dtype=float), (nsub,)).copy()
        converged, notes = np.ones(nsub, bool), ("",) * nsub
    est, sw, rq, weights = _pool_rows(y, v, mask, tau2_arr, hksj=hksj, with_weights=with_weights)
    return _random_results(
        method, est, sw, rq, n, tau2_arr, converged, notes, weights, hksj, confidence_level
    )


def _per_distinct(fn, x: np.ndarray, *args) -> np.ndarray:
    """fn(x, *args) elementwise, evaluated once per distinct value of x."""
    u, inv = np.unique(x, return_inverse=True)
    return fn(u, *args)[inv.reshape(x.shape)]


def _random_results(
    method, est, sw, rq, n, tau2_arr, converged, notes, weights, hksj, confidence_level
):
    """PooledEstimate per row from each subset's estimate, sum of weights, HKSJ numerator
    and tau^2 (the same arithmetic as :func:`random_effects`, done on whole arrays; the
    rows are built by :func:`instances`, see :func:`_fixed_results`)."""
    from scipy.special import ndtr, stdtr, stdtrit

    alpha_half = 0.5 + confidence_level / 2.0
    use_t = hksj & (n >= 2)
    se = 1.0 / np.sqrt(sw)
    df = (n - 1).astype(float)
    q = rq / df
    stat_z = est / se
    p_z = 2.0 * ndtr(-np.abs(stat_z))
    # t quantiles once per distinct df (leave-one-out rows share one): each costs a search
    tq = _per_distinct(stdtrit, n - 2.0, alpha_half)
    half = tq * np.sqrt(tau2_arr + se**2)
    z = _norm_ppf(alpha_half)
    # the chosen interval of each row: t with HKSJ (two or more studies), otherwise z
    s_out, crit, stat, p = se, np.full(n.shape, z), stat_z, p_z
    if np.any(use_t):
        se_h = np.sqrt(np.maximum(1.0, q) / sw)
        crit_t = _per_distinct(stdtrit, df, alpha_half)
        stat_t = est / se_h
        p_t = 2.0 * stdtr(df, -np.abs(stat_t))
        s_out = np.where(use_t, se_h, se)
        crit = np.where(use_t, crit_t, z)
        stat = np.where(use_t, stat_t, stat_z)
        p = np.where(use_t, p_t, p_z)
    n_l = [int(x) for x in n.tolist()]
    t_l = use_t.tolist()
    ci = _intervals((est - crit * s_out).tolist(), (est + crit * s_out).tolist())
    pi = _intervals((est - half).tolist(), (est + half).tolist())
    if min(n_l, default=3) < 3:  # a prediction interval needs three studies
        pi = [c if nb >= 3 else None for c, nb in zip(pi, n_l)]
    df_col = [d if t else None for d, t in zip(df.tolist(), t_l)] if any(t_l) else repeat(None)
    notes_col = notes
    if hksj and not all(t_l):
        hksj_note = "HKSJ needs two or more studies: z interval"
        notes_col = [
            nt if t else (nt + "; " if nt else "") + hksj_note for nt, t in zip(notes, t_l)
        ]
    objs = instances(
        PooledEstimate,
        repeat(method),
        est.tolist(),
        s_out.tolist(),
        ci,
        stat.tolist(),
        p.tolist(),
        repeat(confidence_level),
        tau2_arr.tolist(),
        df_col,
        t_l,
        n_l,
        pi,
        weights,
        np.asarray(converged, dtype=bool).tolist(),
        notes_col,
    )
    return _with_empty_rows(objs, n_l)
