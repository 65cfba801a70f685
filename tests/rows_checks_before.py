"""The row checks over many rows as they were before the column-wise rewrite of issue 16
(commit d6e8c31: intake/clean_rows.py, checks.check_rows and checks.entered_twice), kept
only as the reference for tests/test_rows_before.py: the new code must give the same
problems, in the same order and words, for every input. Not imported by Lopside.
"""

from __future__ import annotations

import math
import operator
from collections.abc import Mapping, Sequence

from lopside.intake.numbers import interval_decimals
from lopside.intake.symmetry import symmetry
from lopside.model.review import (
    BINARY_MEASURES,
    CONTINUOUS_MEASURES,
    MEASURES,
    NUMERIC_FIELDS,
    RATIO_MEASURES,
    RISK_OF_BIAS_LEVELS,
    StudyRow,
    plain_number,
)

_COUNTS = ("int_events", "int_total", "ctl_events", "ctl_total")
#: fields a row entered as 2x2 counts only leaves blank (``n`` is checked on its own)
_BLANK = tuple(f for f in NUMERIC_FIELDS if f not in _COUNTS and f != "n")
_MEANS = ("int_mean", "int_sd", "int_n", "ctl_mean", "ctl_sd", "ctl_n")
_arms = operator.attrgetter(*_COUNTS, *_MEANS)
_blank = operator.attrgetter(*_BLANK)
_estimate_routes = operator.attrgetter("estimate", "lower", "upper", "level", "se", "p")
_counts = operator.attrgetter(*_COUNTS)
_means = operator.attrgetter(*_MEANS)


def clean_count_rows(rows: Sequence[StudyRow], measure: str) -> list[bool]:
    """For each row, True when it is entered as 2x2 counts only and :func:`check_row`
    would find nothing wrong with it (decided over arrays for all rows at once).

    False means only "check this row one by one": a row with anything else entered, or
    any value the arrays cannot vouch for, is left to :func:`check_row`.
    """
    flags = [False] * len(rows)
    if measure not in BINARY_MEASURES:
        return flags
    idx, vals = [], []
    for i, r in enumerate(rows):
        if r.unread or not r.reported or not isinstance(r.study, str) or not r.study.strip():
            continue
        if _blank(r).count(None) != len(_BLANK):
            continue
        v = [getattr(r, f) for f in _COUNTS] + [r.n]
        if not all(plain_number(x) for x in v[:4]) or (v[4] is not None and not plain_number(v[4])):
            continue
        rob = r.risk_of_bias
        if rob is not None and rob.strip().casefold() not in RISK_OF_BIAS_LEVELS:
            continue
        idx.append(i)
        vals.append([math.nan if x is None else x for x in v])
    if not idx:
        return flags
    import numpy as np  # here, not at the top: the readers import this module

    a = np.array(vals, dtype=float).reshape(-1, 5)
    e1, t1, e0, t0, n = a.T
    counts = a[:, :4]
    with np.errstate(invalid="ignore"):
        ok = np.isfinite(counts).all(axis=1) & (counts >= 0).all(axis=1)
        ok &= (np.trunc(counts) == counts).all(axis=1)  # whole numbers
        ok &= (e1 <= t1) & (e0 <= t0) & (t1 > 0) & (t0 > 0)
        ok &= np.isnan(n) | (np.isfinite(n) & (n >= 0) & (np.trunc(n) == n))
        if measure in ("OR", "RR"):
            ok &= ~((e1 == 0) & (e0 == 0))  # no events in either arm
            ok &= ~((e1 == t1) & (e0 == t0))  # every participant had the event
    # a value typed as nan is not blank: it is reported (np.nan marks a blank n only)
    for j in np.flatnonzero(ok).tolist():
        if rows[idx[j]].n is None or math.isfinite(rows[idx[j]].n):
            flags[idx[j]] = True
    return flags


def _labelled(r: StudyRow) -> bool:
    """A reported row with a label, nothing unread and a risk of bias that reads."""
    if r.unread or not r.reported or not isinstance(r.study, str) or not r.study.strip():
        return False
    rob = r.risk_of_bias
    return rob is None or rob.strip().casefold() in RISK_OF_BIAS_LEVELS


def _value(x: object) -> float | None:
    """A plain finite int or float as a float, else None (left to check_row)."""
    t = type(x)
    if t is float:
        return x if math.isfinite(x) else None  # type: ignore[arg-type]
    if t is int:
        try:
            return float(x)  # type: ignore[arg-type]
        except OverflowError:
            return None
    return None


def _count_ok(x: object) -> bool:
    """Blank, or a whole number of at least 0 (no "negative" or "not whole" problem)."""
    if x is None:
        return True
    v = _value(x)
    return v is not None and v >= 0 and v == int(v)


def _decimals(r: StudyRow, printed: Mapping[str, str], memo: dict) -> tuple[int, int, int]:
    """The decimals check_row's interval rule takes for the estimate and its limits (the
    same function it calls), remembered per row of stored values."""
    values = (r.estimate, r.lower, r.upper)
    texts = (printed.get("estimate"), printed.get("lower"), printed.get("upper"))
    if any(texts):
        return interval_decimals(values, texts)  # type: ignore[arg-type]
    if values not in memo:
        memo[values] = interval_decimals(values, texts)  # type: ignore[arg-type]
    return memo[values]


def _symmetric(r: StudyRow, measure: str, decimals: tuple[int, int, int]) -> bool:
    """True when check_row's interval rule finds nothing (the very function it uses)."""
    sym = symmetry(r.estimate, r.lower, r.upper, measure, decimals)  # type: ignore[arg-type]
    if measure in RATIO_MEASURES:
        return sym.log_ok is not False
    return sym.linear_ok


def _surely_symmetric(cand: list[tuple], measure: str) -> list[bool]:
    """For each (est, lower, upper, decimals), True when the interval rule surely finds
    nothing; False means "ask :func:`_symmetric`".

    The rule (:func:`lopside.intake.symmetry.symmetry`) asks whether
    f(e) - (f(lo) + f(hi)) / 2 can be 0 within the rounding box. On the plain scale the
    +, -, / here are those of the rule, so the answer is the rule's. On the log scale
    numpy's log may differ from :func:`math.log` in the last bits, so a row passes here
    only with a margin a million times larger than any such difference.
    """
    import numpy as np

    halves: dict[int, float] = {}
    cols = list(zip(*cand, strict=True))
    e, lo, hi = (np.array(c, dtype=float) for c in cols[:3])
    for d in {d for ds in cols[3] for d in ds}:
        halves[d] = 0.5 * 10.0 ** (-d)
    he, hl, hu = (np.array([halves[ds[k]] for ds in cols[3]]) for k in range(3))
    with np.errstate(all="ignore"):
        if measure not in RATIO_MEASURES:
            low = (e - he) - ((lo + hl) + (hi + hu)) / 2.0
            high = (e + he) - ((lo - hl) + (hi - hu)) / 2.0
            return ((low <= 0.0) & (0.0 <= high)).tolist()
        args_low, args_high = (e - he, lo + hl, hi + hu), (e + he, lo - hl, hi - hu)
        no_range = (args_low[0] <= 0) | (args_low[1] <= 0) | (args_low[2] <= 0)
        open_high = (args_high[1] <= 0) | (args_high[2] <= 0)
        la, lb, lc = (np.log(x) for x in args_low)
        ha, hb, hc = (np.log(x) for x in args_high)
        low, high = la - (lb + lc) / 2.0, ha - (hb + hc) / 2.0
        m_low = 1e-12 * (1 + np.abs(la) + np.abs(lb) + np.abs(lc))
        m_high = 1e-12 * (1 + np.abs(ha) + np.abs(hb) + np.abs(hc))
        sure = no_range | ((low <= -m_low) & (open_high | (high >= m_high)))
    return sure.tolist()


def clean_estimate_rows(
    rows: Sequence[StudyRow],
    measure: str,
    ci_level: float,
    level_bounds: tuple[float, float],
    printed: Sequence[Mapping[str, str]] | None = None,
) -> list[bool]:
    """For each row, True when it is entered as an estimate with its SE or CI (no counts,
    means or P value) and :func:`~lopside.intake.checks.check_row` would find nothing wrong
    with it. ``level_bounds`` are the usable CI levels (both excluded)."""
    flags = [False] * len(rows)
    if measure not in MEASURES:
        return flags  # check_row refuses it
    low, high = level_bounds
    review_level_ok: bool | None = None
    ratio, rd = measure in RATIO_MEASURES, measure == "RD"
    memo: dict[object, int] = {}
    intervals: list[tuple] = []  # (index, est, lower, upper, decimals) to check for symmetry
    for i, r in enumerate(rows):
        if r.estimate is None or r.p is not None or not _labelled(r):
            continue
        if _arms(r).count(None) != 10 or not _count_ok(r.n):
            continue
        est, se = _value(r.estimate), None if r.se is None else _value(r.se)
        if est is None or (r.se is not None and not (se is not None and se > 0)):
            continue
        if r.level is not None:
            level = _value(r.level)
            if level is None or not low < level < high:
                continue
        if r.lower is None and r.upper is None:
            ends: tuple[float, ...] = (est,)
            if se is None:
                continue  # nothing to analyse
        elif r.lower is not None and r.upper is not None:
            lo, hi = _value(r.lower), _value(r.upper)
            if lo is None or hi is None or not lo < hi or not lo <= est <= hi:
                continue
            if r.level is None:
                if review_level_ok is None:
                    review_level_ok = low < ci_level < high
                if not review_level_ok:
                    continue
            ends = (est, lo, hi)
        else:
            continue  # half an interval
        if ratio and not min(ends) > 0:
            continue
        if rd and not max(abs(v) for v in ends) <= 1.0:
            continue
        if len(ends) == 3:
            pr = (printed[i] if printed is not None and i < len(printed) else None) or {}
            intervals.append((i, *ends, _decimals(r, pr, memo)))
            continue
        flags[i] = True
    if intervals:
        sure = _surely_symmetric([c[1:] for c in intervals], measure)
        for (i, *_, decimals), ok in zip(intervals, sure, strict=True):
            flags[i] = ok or _symmetric(rows[i], measure, decimals)
    return flags


def clean_means_rows(rows: Sequence[StudyRow], measure: str) -> list[bool]:
    """For each row, True when it is entered as means, SDs and sizes per arm only (MD,
    SMD) and :func:`~lopside.intake.checks.check_row` would find nothing wrong with it."""
    flags = [False] * len(rows)
    if measure not in CONTINUOUS_MEASURES:
        return flags
    for i, r in enumerate(rows):
        if _estimate_routes(r).count(None) != 6 or _counts(r).count(None) != 4:
            continue
        if not _labelled(r) or not _count_ok(r.n):
            continue
        m1, s1, n1, m0, s0, n0 = (_value(v) for v in _means(r))
        if None in (m1, m0) or not (_count_ok(r.int_n) and _count_ok(r.ctl_n)):
            continue
        if s1 is None or s0 is None or not (s1 > 0 and s0 > 0):
            continue
        if n1 is None or n0 is None or not (n1 >= 2 and n0 >= 2):
            continue
        flags[i] = True
    return flags


# -- checks.check_rows and checks.entered_twice ---------------------------------------

from lopside.intake import messages as M  # noqa: E402
from lopside.intake.checks import (  # noqa: E402
    LEVEL_MAX,
    LEVEL_MIN,
    WARNING,
    Problem,
    _entry_key,
    check_row,
)


def check_rows(
    rows: Sequence[StudyRow],
    measure: str,
    ci_level: float = 95.0,
    *,
    printed: Sequence[Mapping[str, str]] | None = None,
    places: Sequence[str] | None = None,
) -> tuple[Problem, ...]:
    """Check every row, the review's CI level, and rows entered twice.

    Parameters
    ----------
    rows : sequence of StudyRow
    measure : str
        One of MEASURES.
    ci_level : float
        The review's CI level in percent.
    printed : sequence of mappings, optional
        For each row, field -> number as printed (same order as ``rows``).
    places : sequence of str, optional
        For each row, where it came from in the file ("spreadsheet row 5"; "" unknown).

    Returns
    -------
    tuple of Problem
        In row order. A review CI level outside (50, 99.99) is reported on each row
        that has an interval without a level of its own.
    """
    out: list[Problem] = []
    clean = clean_count_rows(rows, measure)
    bounds = (LEVEL_MIN, LEVEL_MAX)
    for other in (
        clean_estimate_rows(rows, measure, ci_level, bounds, printed),
        clean_means_rows(rows, measure),
    ):
        clean = [a or b for a, b in zip(clean, other, strict=True)]
    twice = entered_twice(rows)
    for i, row in enumerate(rows):
        place = places[i] if places is not None and i < len(places) else ""
        if not clean[i]:
            pr = printed[i] if printed is not None and i < len(printed) else None
            out.extend(check_row(row, measure, ci_level, index=i, printed=pr, place=place))
        if i in twice:
            text = M.where(i, row.study, "", place) + M.check_message(
                "duplicate", other=twice[i] + 1
            )
            out.append(Problem(i, row.study, "", WARNING, text, "duplicate"))
    return tuple(out)


def entered_twice(rows: Sequence[StudyRow]) -> dict[int, int]:
    """Row -> the earlier row it repeats (same entry in every field; a row with neither a
    label nor an estimate is never called a repeat)."""
    # rows can be the same entry only if these few fields print the same: compare whole
    # entries only within such groups
    groups: dict[tuple, list[int]] = {}
    for i, r in enumerate(rows):
        quick = (r.study, repr(r.int_events), repr(r.estimate), repr(r.int_total))
        groups.setdefault(quick, []).append(i)
    out: dict[int, int] = {}
    for members in groups.values():
        if len(members) < 2:
            continue
        seen: dict[tuple, int] = {}
        for i in members:
            key = _entry_key(rows[i])
            if key in seen and (rows[i].study or rows[i].estimate is not None):
                out[i] = seen[key]
            else:
                seen.setdefault(key, i)
    return out
