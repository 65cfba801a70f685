"""Effect derivation over many rows and the arrays of the analysed studies, as the code
was before the column-wise rewrite of issue 16 (commit d6e8c31: stats/derived_rows.py,
stats/derived_batch.py, effects.derive_all, analysis.build_study_data), kept only as the
reference for tests/test_rows_before.py: the new code must give the same objects and the
same bits for every input. Not imported by Lopside.
"""

from __future__ import annotations

import math
import operator
from collections.abc import Iterable, Sequence

import numpy as np

from lopside.model.review import (
    BINARY_MEASURES,
    CONTINUOUS_MEASURES,
    MEASURES,
    RATIO_MEASURES,
    Review,
    StudyRow,
    plain_number,
)
from lopside.stats.derived import (
    _MEASURE_WORDS,
    ASYMMETRY_NOTE,
    AUTO_T_ARM_SIZE,
    MAX_ABS_EFFECT,
    MAX_ARM_TOTAL,
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


# -- stats/derived_batch.py ----------------------------------------------------------


_values = operator.attrgetter("int_events", "int_total", "ctl_events", "ctl_total", "n")


def _candidates(rows: Sequence) -> tuple[list[int], np.ndarray, list[bool]]:
    """Rows whose only route is the counts, with their values (e1, t1, e0, t0, n)."""
    idx: list[int] = []
    vals: list[tuple] = []
    has_n: list[bool] = []
    for i, r in enumerate(rows):
        if not getattr(r, "reported", True):
            continue
        if r.estimate is not None and (
            (r.lower is not None and r.upper is not None) or r.se is not None or r.p is not None
        ):
            continue  # another route entered: the one-row path notes it
        v = (r.int_events, r.int_total, r.ctl_events, r.ctl_total, r.n)
        if not all(plain_number(x) for x in v[:4]) or (v[4] is not None and not plain_number(v[4])):
            continue
        idx.append(i)
        vals.append(v[:4] + (math.nan if v[4] is None else v[4],))
        has_n.append(v[4] is not None)
    return idx, np.array(vals, dtype=float).reshape(-1, 5), has_n


def counts_batch(rows: Sequence, measure: str) -> list[Derived | None]:
    """For each row, its :class:`Derived` from the 2x2 counts, or None for the one-row path."""
    out: list[Derived | None] = [None] * len(rows)
    if measure not in BINARY_MEASURES:
        return out
    idx, v, has_n = _candidates(rows)
    if not idx:
        return out
    e1, t1, e0, t0, n = v.T
    given = np.array(has_n, dtype=bool)
    with np.errstate(all="ignore"):
        ok = np.isfinite(v[:, :4]).all(axis=1)
        for ev, tot in ((e1, t1), (e0, t0)):
            ok &= (tot > 0) & (tot <= MAX_ARM_TOTAL) & (ev >= 0) & (ev <= tot)
        ok &= ~given | (np.isfinite(n) & (n > 0))
        a, b, c, d = e1, t1 - e1, e0, t0 - e0
        n1, n0 = a + b, c + d
        if measure in RATIO_MEASURES:
            ok &= (a > 0) & (b > 0) & (c > 0) & (d > 0)  # no zero cell, no correction
            if measure == "OR":
                arg, var = a * d / (b * c), 1 / a + 1 / b + 1 / c + 1 / d
            else:
                arg, var = (a / n1) / (c / n0), 1 / a - 1 / n1 + 1 / c - 1 / n0
        else:
            arg, var = a / n1 - c / n0, np.full_like(a, np.nan)
        p1, p0 = a / n1, c / n0
        asd_var = 1 / (4 * n1) + 1 / (4 * n0)
    text = f"{_MEASURE_WORDS[measure]} from 2x2 counts"
    rd = measure == "RD"
    cols = (a, b, c, d, n1, n0, t1, t0, n, arg, var, p1, p0, asd_var)
    per_row = list(zip(*(x.tolist() for x in cols), strict=True))
    for j in np.flatnonzero(ok).tolist():
        aj, bj, cj, dj, n1j, n0j, t1j, t0j, nj, argj, varj, p1j, p0j, avj = per_row[j]
        if rd:
            yj, varj = argj, aj * bj / n1j**3 + cj * dj / n0j**3
            if not varj > 0:
                continue  # the one-row path corrects the variance
        else:
            yj = math.log(argj)
        if not (math.isfinite(yj) and math.isfinite(varj) and varj > 0):
            continue
        se = math.sqrt(varj)
        if abs(yj) > MAX_ABS_EFFECT or not MIN_SE <= se <= MAX_SE:
            continue
        out[idx[j]] = Derived(
            y=yj,
            se=se,
            route="counts",
            route_text=text,
            double_zero=aj == 0 and cj == 0,
            a=aj,
            b=bj,
            c=cj,
            d=dj,
            n1=t1j,
            n0=t0j,
            n_total=nj if has_n[j] else t1j + t0j,
            asd=math.asin(math.sqrt(p1j)) - math.asin(math.sqrt(p0j)),
            asd_var=avj,
        )
    return out


def derive_batch(
    rows: Sequence,
    measure: str,
    *,
    ci_level: float = 95.0,
    ci_method: str = "z",
    smd_correction: str = "exact",
) -> list[Derived | None]:
    """Each row's :class:`Derived` by the first batch path that vouches for it, else None.

    The paths take disjoint rows (2x2 counts only; an estimate with its SE or CI only;
    means, SDs and sizes only), so at most one of them gives a row its result.
    """
    out = counts_batch(rows, measure)
    for other in (
        estimate_batch(rows, measure, ci_level=ci_level, ci_method=ci_method),
        means_batch(rows, measure, smd_correction=smd_correction),
    ):
        out = [f if f is not None else o for f, o in zip(out, other, strict=True)]
    return out


# -- effects.derive_all --------------------------------------------------------------

from lopside.stats.effects import derive  # noqa: E402


def derive_all(rows: Iterable[StudyRow], measure: str, **kw: object) -> tuple[Derived, ...]:
    """:func:`derive` for every row, in order.

    Parameters
    ----------
    rows : iterable of StudyRow
    measure : str
    **kw
        Passed to :func:`derive` (``ci_level``, ``ci_method``, ``smd_correction``).

    Returns
    -------
    tuple of Derived

    Rows entered by one clean route (2x2 counts, an estimate with its SE or CI, or means
    and SDs) are derived together over arrays
    (:func:`lopside.stats.derived_batch.derive_batch`, the same numbers); the first row
    always takes the one-row path, so bad keyword arguments raise as before.
    """
    rows = tuple(rows)
    if not rows:
        return ()
    first = derive(rows[0], measure, **kw)  # type: ignore[arg-type]
    fast = derive_batch(rows[1:], measure, **kw)  # type: ignore[arg-type]
    rest = (
        f if f is not None else derive(row, measure, **kw)  # type: ignore[arg-type]
        for row, f in zip(rows[1:], fast, strict=True)
    )
    return (first, *rest)


# -- study_arrays.build_study_data (formerly in analysis) ----------------------------

from lopside.stats.data import StudyData  # noqa: E402
from lopside.study_arrays import (  # noqa: E402
    _OPTIONAL_COLUMNS,
    UNREPORTED_REASON,
    ExcludedStudy,
    _nan_columns,
)


def build_study_data(review: Review, measure: str, derived) -> tuple[StudyData, tuple]:
    """Arrays of the included, usable studies, and the list of those left out (with why)."""
    keep: list[int] = []
    excluded: list[ExcludedStudy] = []
    for i, (row, d) in enumerate(zip(review.studies, derived)):
        label = row.study or f"Row {i + 1}"
        usable = d.y is not None and d.se is not None and math.isfinite(d.y) and d.se > 0
        if not row.reported:
            excluded.append(ExcludedStudy(i, label, UNREPORTED_REASON))
        elif row.exclude:
            excluded.append(
                ExcludedStudy(
                    i,
                    label,
                    "excluded by the appraiser",
                    d.y if usable else None,
                    d.se if usable else None,
                )
            )
        elif not usable:
            why = "; ".join(d.problems) if d.problems else "no usable effect and standard error"
            excluded.append(ExcludedStudy(i, label, why))
        else:
            keep.append(i)
    rows = [review.studies[i] for i in keep]
    ds = [derived[i] for i in keep]
    # one table of the optional numbers (None -> nan, as float() of each value would give)
    cols = _nan_columns(ds, _OPTIONAL_COLUMNS)
    data = StudyData(
        measure=measure,
        y=np.array([d.y for d in ds], dtype=float),
        se=np.array([d.se for d in ds], dtype=float),
        labels=tuple(r.study or f"Row {i + 1}" for i, r in zip(keep, rows)),
        rows=tuple(keep),
        **cols,
        risk_of_bias=tuple((r.risk_of_bias or "").strip().lower() for r in rows),
        subgroup=tuple((r.subgroup or "").strip() for r in rows),
    )
    return data, tuple(excluded)
