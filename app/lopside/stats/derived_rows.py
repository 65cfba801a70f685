"""Effect derivation for many rows at once: an estimate with its SE or CI, and means/SDs.

Reviews read off a published forest plot enter every study as an estimate with its
confidence interval (or its SE); reviews of continuous outcomes often enter means, SDs
and sizes per arm. For those rows the routes of :mod:`lopside.stats.effects` are the same
arithmetic row after row, so they are done here over arrays: the validity checks and the
+, -, *, / (exactly rounded in numpy as in Python), with the logarithms, square roots,
quantiles (the same helpers, one call per distinct level and degrees of freedom) and
Hedges' J taken per value as the one-row routes take them. The numbers are therefore the
ones :func:`lopside.stats.effects.derive` gives, bit for bit (tests/test_rows_batch.py).

A row takes this path only when the one-row route would raise nothing, note nothing and
correct nothing: plain int/float values, exactly one route entered (no 2x2 counts, no P
value, no second estimate route), a blank or positive ``n``; for an interval a usable
level (given in percent), limits in order around the estimate, above 0 for ratios, an
interval symmetric enough not to be noted and a z or t quantile the one-row route would
use without a note; for an SE a positive SE; for means SDs of at least 0 and arms of at
least 2; and an effect and SE inside the limits. Every other row is left to
:func:`~lopside.stats.effects.derive` (``None`` in the list returned).
"""

from __future__ import annotations

import math
import operator
from collections.abc import Sequence

import numpy as np

from lopside.model.review import CONTINUOUS_MEASURES, MEASURES, RATIO_MEASURES

from .derived import (
    ASYMMETRY_NOTE,
    AUTO_T_ARM_SIZE,
    MAX_ABS_EFFECT,
    MAX_SE,
    MIN_SE,
    Derived,
    _fmt,
    _t_quantile,
    _z_quantile,
    hedges_j,
)

_COUNTS = operator.attrgetter("int_events", "int_total", "ctl_events", "ctl_total")
_MEANS = operator.attrgetter("int_mean", "int_sd", "int_n", "ctl_mean", "ctl_sd", "ctl_n")
_ARMS = operator.attrgetter(
    "int_events", "int_total", "ctl_events", "ctl_total",
    "int_mean", "int_sd", "int_n", "ctl_mean", "ctl_sd", "ctl_n",
)  # fmt: skip


def _float(x: object) -> float | None:
    """``float(x)`` for a plain finite int or float, else None (left to the one-row path)."""
    t = type(x)
    if t is float:
        return x if math.isfinite(x) else None  # type: ignore[arg-type]
    if t is int:
        try:
            return float(x)  # type: ignore[arg-type]
        except OverflowError:
            return None
    return None


def _total(row) -> tuple[bool, float | None]:
    """(usable?, n) for the row's total: blank, or a plain number above 0 (else noted)."""
    if row.n is None:
        return True, None
    n = _float(row.n)
    return (n is not None and n > 0), n


def _inside_limits(y: float, var: float) -> float | None:
    """The SE when the effect and its variance pass the one-row route's final checks."""
    if not (math.isfinite(y) and math.isfinite(var) and var > 0):
        return None
    se = math.sqrt(var)
    if abs(y) > MAX_ABS_EFFECT or not MIN_SE <= se <= MAX_SE:
        return None
    return se


# --------------------------------------------------------------------------------------
# estimate with SE or CI


def _estimate_candidates(rows: Sequence, ci_level: object):
    """Rows whose only route is the estimate with its SE, or with its CI, and their values."""
    se_rows: list[tuple] = []  # (index, est, se, n)
    ci_rows: list[tuple] = []  # (index, est, lo, hi, level, n)
    for i, r in enumerate(rows):
        if r.estimate is None or r.p is not None or not getattr(r, "reported", True):
            continue
        if _ARMS(r).count(None) != 10:
            continue  # counts or means entered too
        est = _float(r.estimate)
        ok_n, n = _total(r)
        if est is None or not ok_n:
            continue
        if r.lower is None and r.upper is None:
            se = _float(r.se)
            if se is not None:
                se_rows.append((i, est, se, n))
        elif r.se is None and r.lower is not None and r.upper is not None:
            lo, hi = _float(r.lower), _float(r.upper)
            if r.level is None:
                level = ci_level
            else:
                level = _float(r.level)
                if level is None or 0 < level < 1:  # a level read as a fraction is noted
                    continue
            try:
                usable = 0 < level < 100  # type: ignore[operator]
            except TypeError:
                continue
            if lo is not None and hi is not None and usable:
                ci_rows.append((i, est, lo, hi, level, n))
    return se_rows, ci_rows


def _se_rows(out: list, cand: list[tuple], measure: str) -> None:
    """The SE route: the estimate (logged for ratios) and the SE as entered."""
    if not cand:
        return
    ratio = measure in RATIO_MEASURES
    idx, est, se, _ = zip(*cand, strict=True)
    e, s = np.array(est), np.array(se)
    ok = (s > 0) & (s >= MIN_SE) & (s <= MAX_SE)
    if ratio:
        ok &= e > 0
    text = "SE as entered" + (" (taken to be on the log scale)" if ratio else "")
    var = (s * s).tolist()
    for j in np.flatnonzero(ok).tolist():
        y = math.log(est[j]) if ratio else est[j]
        if abs(y) > MAX_ABS_EFFECT:
            continue
        sd = _inside_limits(y, var[j])
        if sd is not None:
            out[idx[j]] = Derived(y=y, se=sd, route="se", route_text=text, n_total=cand[j][3])


def _quantile(level, n_total, measure: str, ci_method: str, cache: dict):
    """(q, df) as the one-row route chooses them for a row with no arm sizes, or None
    where that route would note or report something (no sizes, a t with too few)."""
    use_t = ci_method == "t"
    df = None if n_total is None else n_total - 2.0
    if ci_method == "auto" and measure in CONTINUOUS_MEASURES:
        if n_total is None or n_total < 2 * AUTO_T_ARM_SIZE:
            return None  # noted: no sizes, or arms taken to be about equal
        use_t = False
    elif ci_method == "auto":
        use_t = False
    if use_t and (df is None or not df >= 1):
        return None
    key = (level, df if use_t else None)
    if key not in cache:
        tail = (1 - level / 100) / 2
        try:
            cache[key] = _t_quantile(tail, df) if use_t else _z_quantile(tail)
        except (ArithmeticError, ValueError):  # the one-row route reports the row
            cache[key] = None
    return None if cache[key] is None else (cache[key], df if use_t else None)


def _ci_rows(out: list, cand: list[tuple], measure: str, ci_method: str) -> None:
    """The CI route: SE = (U - L) / (2 q), limits logged first for ratios."""
    if not cand:
        return
    ratio = measure in RATIO_MEASURES
    idx, est, lo, hi, level, n = zip(*cand, strict=True)
    e, lo_a, hi_a = np.array(est), np.array(lo), np.array(hi)
    ok = (lo_a < hi_a) & (lo_a <= e) & (e <= hi_a)
    if ratio:
        ok &= (e > 0) & (lo_a > 0)
    take = np.flatnonzero(ok).tolist()
    if ratio:
        logs = [(math.log(est[j]), math.log(lo[j]), math.log(hi[j])) for j in take]
    else:
        logs = [(est[j], lo[j], hi[j]) for j in take]
    scale = " on the log scale" if ratio else ""
    cache: dict = {}
    qs = [_quantile(level[j], n[j], measure, ci_method, cache) for j in take]
    keep = [k for k, q in enumerate(qs) if q is not None]
    if not keep:
        return
    y, lo_l, hi_l = (np.array(c) for c in zip(*(logs[k] for k in keep), strict=True))
    q = np.array([qs[k][0] for k in keep])
    divisor = 2 * q
    se = (hi_l - lo_l) / divisor
    asym = (se > 0) & (np.abs(y - (lo_l + hi_l) / 2) > ASYMMETRY_NOTE * se)
    var = (se * se).tolist()
    ys, divs, noted = y.tolist(), divisor.tolist(), asym.tolist()
    texts: dict = {}  # one text per level and df (the divisor follows from them)
    for m, k in enumerate(keep):
        if noted[m]:
            continue
        sd = _inside_limits(ys[m], var[m])
        if sd is None:
            continue
        j = take[k]
        df = qs[k][1]
        text = texts.get((level[j], df))
        if text is None:
            kind = "z-based" if df is None else f"t-based, df = {_fmt(df or 0)}"
            text = f"SE from the {_fmt(level[j])}% CI{scale} ({kind}, divisor {divs[m]:.2f})"
            texts[level[j], df] = text
        out[idx[j]] = Derived(y=ys[m], se=sd, route="ci", route_text=text, n_total=n[j], df=df)


def estimate_batch(
    rows: Sequence, measure: str, *, ci_level: float = 95.0, ci_method: str = "z"
) -> list[Derived | None]:
    """For each row entered as an estimate with its SE or CI only, its :class:`Derived`;
    None for the one-row path."""
    out: list[Derived | None] = [None] * len(rows)
    if measure not in MEASURES:
        return out
    se_rows, ci_rows = _estimate_candidates(rows, ci_level)
    with np.errstate(all="ignore"):
        _se_rows(out, se_rows, measure)
        _ci_rows(out, ci_rows, measure, ci_method)
    return out


# --------------------------------------------------------------------------------------
# means, SDs and sizes per arm


def _means_candidates(rows: Sequence) -> list[tuple]:
    """Rows whose only route is the means, with (index, m1, s1, n1, m0, s0, n0, n)."""
    cand = []
    for i, r in enumerate(rows):
        if not getattr(r, "reported", True) or _COUNTS(r).count(None) != 4:
            continue
        if r.estimate is not None and (
            (r.lower is not None and r.upper is not None) or r.se is not None or r.p is not None
        ):
            continue  # another route entered: the one-row path notes it
        vals = [_float(v) for v in _MEANS(r)]
        ok_n, n = _total(r)
        if ok_n and None not in vals:
            cand.append((i, *vals, n))
    return cand


def means_batch(rows: Sequence, measure: str, *, smd_correction: str = "exact") -> list:
    """For each row entered as means, SDs and sizes only (MD, SMD), its :class:`Derived`;
    None for the one-row path."""
    out: list[Derived | None] = [None] * len(rows)
    cand = _means_candidates(rows) if measure in CONTINUOUS_MEASURES else []
    if not cand:
        return out
    idx = [c[0] for c in cand]
    n_given = [c[7] for c in cand]
    m1, s1, n1, m0, s0, n0 = np.array([c[1:7] for c in cand], dtype=float).T
    with np.errstate(all="ignore"):
        ok = (s1 >= 0) & (s0 >= 0) & (n1 >= 2) & (n0 >= 2)
        if measure == "MD":
            y, var = m1 - m0, s1 * s1 / n1 + s0 * s0 / n0
            cols = (y, var, n1, n0)
        else:
            m = n1 + n0 - 2.0
            sp2 = ((n1 - 1) * s1 * s1 + (n0 - 1) * s0 * s0) / m
            ok &= sp2 > 0
            cols = (m1 - m0, sp2, m, n1, n0, n1 + n0, n1 * n0)
    per_row = list(zip(*(c.tolist() for c in cols), strict=True))
    exact = smd_correction == "exact"
    kind = "exact" if exact else "approximate"
    cache: dict = {}
    for j in np.flatnonzero(ok).tolist():
        if measure == "MD":
            yj, varj, n1j, n0j = per_row[j]
            text = "mean difference from means and SDs"
            se_mod = None
        else:
            diff, sp2j, mj, n1j, n0j, big_n, prod = per_row[j]
            try:
                if mj not in cache:
                    cache[mj] = hedges_j(mj, exact=exact)
                jj = cache[mj]
                yj = jj * (diff / math.sqrt(sp2j))
                varj = big_n / prod + yj * yj / (2.0 * big_n)
            except (ArithmeticError, ValueError):
                continue
            text = (
                f"Hedges' g from means and SDs (pooled SD; {kind} small-sample factor "
                f"J = {jj:.4f}; large-sample variance)"
            )
            inv = 1 / n1j + 1 / n0j
            se_mod = math.sqrt(inv) if math.isfinite(inv) else None
        sd = _inside_limits(yj, varj)
        if sd is None:
            continue
        out[idx[j]] = Derived(
            y=yj,
            se=sd,
            route="means",
            route_text=text,
            n1=n1j,
            n0=n0j,
            n_total=n_given[j] if n_given[j] is not None else n1j + n0j,
            se_modified=se_mod,
        )
    return out
