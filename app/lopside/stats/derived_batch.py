"""Effect derivation from 2x2 counts for many rows at once (numpy over rows).

Most reviews of binary outcomes enter every study as events and totals. For those rows
the 2x2 route of :mod:`lopside.stats.effects` is the same arithmetic row after row, so it
is done here over arrays: the validity checks and the cell arithmetic (+, -, *, / and
square roots are exactly rounded in numpy as in Python), with the logarithms, arcsines
and the cubes of the RD variance taken per value by :mod:`math` and Python's float power
as the one-row route takes them. The numbers are therefore
the ones :func:`lopside.stats.effects.derive` gives, bit for bit (tested).

A row takes this path only when the one-row route would raise nothing, note nothing and
correct nothing: plain int/float counts that are valid, no estimate route entered beside
them, a valid or blank ``n``, no zero cell (ratio measures) and a positive variance (RD),
and an effect and SE inside the limits. Every other row is left to
:func:`~lopside.stats.effects.derive` (``None`` in the list returned).

Rows entered as an estimate with its SE, or with its CI, and rows entered as means, SDs
and sizes per arm, take :mod:`lopside.stats.derived_rows` the same way. Every path reads
the rows' fields once, column by column (:class:`~lopside.stats.derived_rows.RowColumns`),
and makes its results field by field (:func:`~lopside.stats.derived_rows.derived_many`);
:func:`batch_rows` gives the rows each path vouches for, :func:`derive_batch` every row's
fast result (or ``None``).
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from lopside.model.review import BINARY_MEASURES, RATIO_MEASURES

from .derived import (
    _MEASURE_WORDS,
    MAX_ARM_TOTAL,
    Derived,
)
from .derived_rows import (
    _COUNT_FIELDS,
    Batch,
    RowColumns,
    _inside,
    _logs,
    _spread,
    derived_many,
    estimate_rows,
    means_rows,
)


def counts_rows(cols: RowColumns, measure: str) -> list[Batch]:
    """The rows entered as 2x2 counts only that the batch vouches for (indices) and their
    results."""
    if measure not in BINARY_MEASURES or not cols.size or cols.blank("int_events"):
        return []
    ok = cols.flag("reported", True)
    other = cols.given("se") | cols.given("p") | (cols.given("lower") & cols.given("upper"))
    ok &= ~(cols.given("estimate") & other)  # another route entered: the one-row path notes it
    ok_n, ns = cols.total()
    ok &= ok_n
    vals = []
    for name in _COUNT_FIELDS:
        plain, v = cols.number(name)
        ok &= plain
        vals.append(v)
    e1, t1, e0, t0 = vals
    with np.errstate(all="ignore"):
        for ev, tot in ((e1, t1), (e0, t0)):
            ok &= (tot > 0) & (tot <= MAX_ARM_TOTAL) & (ev >= 0) & (ev <= tot)
        a, b, c, d = e1, t1 - e1, e0, t0 - e0
        if measure in RATIO_MEASURES:
            ok &= (a > 0) & (b > 0) & (c > 0) & (d > 0)  # no zero cell, no correction
        idx = np.flatnonzero(ok)
        a, b, c, d, t1, t0 = (x[idx] for x in (a, b, c, d, t1, t0))
        n1, n0 = a + b, c + d
        if measure == "OR":
            y, var = _logs(a * d / (b * c)), 1 / a + 1 / b + 1 / c + 1 / d
        elif measure == "RR":
            y, var = _logs((a / n1) / (c / n0)), 1 / a - 1 / n1 + 1 / c - 1 / n0
        else:  # RD: n**3 as Python's float power takes it (the one-row route's)
            cube1 = np.array([x**3 for x in n1.tolist()], dtype=float)
            cube0 = np.array([x**3 for x in n0.tolist()], dtype=float)
            y, var = a / n1 - c / n0, a * b / cube1 + c * d / cube0
        good, sd = _inside(y, var)  # an RD variance of 0 is corrected by the one-row path
        idx, a, b, c, d, t1, t0, n1, n0 = (x[good] for x in (idx, a, b, c, d, t1, t0, n1, n0))
        asin1 = list(map(math.asin, np.sqrt(a / n1).tolist()))
        asin0 = list(map(math.asin, np.sqrt(c / n0).tolist()))
        asd = np.array(asin1, dtype=float) - np.array(asin0, dtype=float)
        asd_var = 1 / (4 * n1) + 1 / (4 * n0)
    t1l, t0l = t1.tolist(), t0.tolist()
    totals = [ns[j] for j in idx.tolist()]
    made = derived_many(
        idx.size,
        y=y[good].tolist(),
        se=sd[good].tolist(),
        route="counts",
        route_text=f"{_MEASURE_WORDS[measure]} from 2x2 counts",
        double_zero=((a == 0) & (c == 0)).tolist(),
        a=a.tolist(),
        b=b.tolist(),
        c=c.tolist(),
        d=d.tolist(),
        n1=t1l,
        n0=t0l,
        n_total=[t if t is not None else x + z for t, x, z in zip(totals, t1l, t0l, strict=True)],
        asd=asd.tolist(),
        asd_var=asd_var.tolist(),
    )
    return [(idx, made)]


def counts_batch(rows: Sequence, measure: str) -> list[Derived | None]:
    """For each row, its :class:`Derived` from the 2x2 counts, or None for the one-row path."""
    cols = RowColumns(rows)
    return _spread(cols.size, counts_rows(cols, measure))


def batch_rows(
    cols: RowColumns,
    measure: str,
    *,
    ci_level: float = 95.0,
    ci_method: str = "z",
    smd_correction: str = "exact",
) -> list[Batch]:
    """The rows some batch path vouches for (indices) and their results, path by path.

    The paths take disjoint rows (2x2 counts only; an estimate with its SE or CI only;
    means, SDs and sizes only), so at most one of them gives a row its result.
    """
    return [
        *counts_rows(cols, measure),
        *estimate_rows(cols, measure, ci_level=ci_level, ci_method=ci_method),
        *means_rows(cols, measure, smd_correction=smd_correction),
    ]


def derive_batch(
    rows: Sequence,
    measure: str,
    *,
    ci_level: float = 95.0,
    ci_method: str = "z",
    smd_correction: str = "exact",
) -> list[Derived | None]:
    """Each row's :class:`Derived` by the first batch path that vouches for it, else None."""
    cols = RowColumns(rows)
    batches = batch_rows(
        cols, measure, ci_level=ci_level, ci_method=ci_method, smd_correction=smd_correction
    )
    return _spread(cols.size, batches)
