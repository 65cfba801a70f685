"""Effect derivation from 2x2 counts for many rows at once (numpy over rows).

Most reviews of binary outcomes enter every study as events and totals. For those rows
the 2x2 route of :mod:`lopside.stats.effects` is the same arithmetic row after row, so it
is done here over arrays: the validity checks and the cell arithmetic (+, -, *, / are
exactly rounded in numpy as in Python), with the logarithms, square roots and arcsines
taken per value by :mod:`math` as the one-row route takes them. The numbers are therefore
the ones :func:`lopside.stats.effects.derive` gives, bit for bit (tested).

A row takes this path only when the one-row route would raise nothing, note nothing and
correct nothing: plain int/float counts that are valid, no estimate route entered beside
them, a valid or blank ``n``, no zero cell (ratio measures) and a positive variance (RD),
and an effect and SE inside the limits. Every other row is left to
:func:`~lopside.stats.effects.derive` (``None`` in the list returned).

Rows entered as an estimate with its SE, or with its CI, and rows entered as means, SDs
and sizes per arm, take :mod:`lopside.stats.derived_rows` the same way; :func:`derive_batch`
gives every row's fast result (or ``None``).
"""

from __future__ import annotations

import math
import operator
from collections.abc import Sequence

import numpy as np

from lopside.model.review import BINARY_MEASURES, RATIO_MEASURES

from .derived import _MEASURE_WORDS, MAX_ABS_EFFECT, MAX_ARM_TOTAL, MAX_SE, MIN_SE, Derived
from .derived_rows import estimate_batch, means_batch

_PLAIN = {int, float}
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
        if not all(type(x) in _PLAIN for x in v[:4]) or (
            v[4] is not None and type(v[4]) not in _PLAIN
        ):
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
