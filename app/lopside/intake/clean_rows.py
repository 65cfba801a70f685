"""Rows the row checks can clear all at once, without checking them one by one.

:func:`lopside.intake.checks.check_rows` checks every row with
:func:`~lopside.intake.checks.check_row`, except the rows these functions vouch for: rows
entered by one clean route (2x2 counts; an estimate with its SE or its CI; means, SDs and
sizes per arm) for which ``check_row`` would find nothing. They apply ``check_row``'s own
comparisons in one pass (the 2x2 counts and the interval rule over numpy arrays, the rest
as plain comparisons per row), skipping only work that provably finds nothing. The
interval rule (symmetry allowing for rounding) passes a row over arrays only when it
surely finds nothing, and otherwise asks the very function ``check_row`` uses. False
means only "check this row one by one": a row with anything else entered, or any value
these functions cannot vouch for, is left to ``check_row``, so every message stays as it
is (tests/test_derive_batch.py and tests/test_rows_batch.py compare the two over many
random rows).
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
    if measure not in BINARY_MEASURES or not rows:
        return [False] * len(rows)
    import numpy as np  # here, not at the top: the readers import this module

    cols = _columns(rows)
    if cols.blank("int_events"):
        return [False] * len(rows)
    ok = _labelled_rows(cols) & cols.none_of(_BLANK)
    vals = []
    for name in _COUNTS:
        plain, v = cols.number(name)
        ok &= plain
        vals.append(v)
    e1, t1, e0, t0 = vals
    with np.errstate(invalid="ignore"):
        for v in vals:
            ok &= (v >= 0) & (np.trunc(v) == v)  # whole numbers
        ok &= (e1 <= t1) & (e0 <= t0) & (t1 > 0) & (t0 > 0)
        ok &= _count_ok_rows(cols, "n")
        if measure in ("OR", "RR"):
            ok &= ~((e1 == 0) & (e0 == 0))  # no events in either arm
            ok &= ~((e1 == t1) & (e0 == t0))  # every participant had the event
    return ok.tolist()


def _columns(rows: Sequence[StudyRow]):
    """The rows' fields read once each, for all rows (the effect derivation's reader,
    shared with it for the same tuple of rows)."""
    from lopside.stats.derived_rows import columns_of

    return columns_of(rows)


def _labelled_rows(cols):
    """For each row, :func:`_labelled` (a value it cannot judge: False, checked one by one)."""
    import numpy as np

    n = cols.size
    ok = cols.flag("reported", True)
    unread = cols.raw("unread")
    if any(unread):
        ok &= ~np.fromiter(map(bool, unread), bool, n)
    study = cols.raw("study")
    if list(map(type, study)).count(str) == n:
        ok &= np.fromiter(map(bool, study), bool, n)
        ok &= ~np.fromiter(map(str.isspace, study), bool, n)  # strip() leaves nothing
    else:
        ok &= np.array([isinstance(x, str) and bool(x.strip()) for x in study], dtype=bool)
    if not cols.blank("risk_of_bias"):
        rob = cols.raw("risk_of_bias")
        try:
            reads = {v: _rob_reads(v) for v in set(rob)}
            ok &= np.fromiter(map(reads.__getitem__, rob), bool, n)
        except TypeError:  # a value that cannot be a key
            ok &= np.array([_rob_reads(v) for v in rob], dtype=bool)
    return ok


def _rob_reads(value: object) -> bool:
    """A blank risk of bias, or one of the levels (anything else: checked one by one)."""
    if value is None:
        return True
    return isinstance(value, str) and value.strip().casefold() in RISK_OF_BIAS_LEVELS


def _count_ok_rows(cols, name: str):
    """For each row, :func:`_count_ok` of the field."""
    import numpy as np

    if cols.blank(name):
        return np.ones(cols.size, dtype=bool)
    plain, v = cols.number(name)
    with np.errstate(invalid="ignore"):
        return ~cols.given(name) | (plain & (v >= 0) & (np.trunc(v) == v))


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
    nothing; False means "ask :func:`_symmetric`" (see :func:`_surely_symmetric_arrays`)."""
    import numpy as np

    cols = list(zip(*cand, strict=True))
    e, lo, hi = (np.array(c, dtype=float) for c in cols[:3])
    decimals = tuple(np.array([ds[k] for ds in cols[3]], dtype=int) for k in range(3))
    return _surely_symmetric_arrays(e, lo, hi, decimals, measure)


def _surely_symmetric_arrays(e, lo, hi, decimals, measure: str) -> list[bool]:
    """For each estimate and limits (arrays) with their decimals (three int arrays), True
    when the interval rule surely finds nothing; False means "ask :func:`_symmetric`".

    The rule (:func:`lopside.intake.symmetry.symmetry`) asks whether
    f(e) - (f(lo) + f(hi)) / 2 can be 0 within the rounding box. On the plain scale the
    +, -, / here are those of the rule, so the answer is the rule's. On the log scale
    numpy's log may differ from :func:`math.log` in the last bits, so a row passes here
    only with a margin a million times larger than any such difference.
    """
    import numpy as np

    # half a unit in the last place, 0.5 * 10.0 ** -d as the rule computes it
    halves = {d: 0.5 * 10.0 ** (-d) for d in set().union(*(set(x.tolist()) for x in decimals))}
    he, hl, hu = (
        np.array(list(map(halves.__getitem__, x.tolist())), dtype=float) for x in decimals
    )
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
    if measure not in MEASURES or not rows:
        return [False] * len(rows)  # check_row refuses an unknown measure
    import numpy as np

    cols = _columns(rows)
    if cols.blank("estimate"):
        return [False] * len(rows)
    low, high = level_bounds
    ok = cols.given("estimate") & ~cols.given("p") & _labelled_rows(cols)
    ok &= cols.none_of(_COUNTS + _MEANS) & _count_ok_rows(cols, "n")
    plain_e, e = cols.number("estimate")
    ok &= plain_e
    with np.errstate(invalid="ignore"):
        se_g = cols.given("se")
        if se_g.any():
            plain_s, se = cols.number("se")
            ok &= ~se_g | (plain_s & (se > 0))
        lv_g = cols.given("level")
        if lv_g.any():
            plain_l, lv = cols.number("level")
            ok &= ~lv_g | (plain_l & (low < lv) & (lv < high))
        lo_g, hi_g = cols.given("lower"), cols.given("upper")
        single = ok & ~lo_g & ~hi_g & se_g  # an estimate and its SE
        both = ok & lo_g & hi_g
        if measure in RATIO_MEASURES:
            single &= e > 0
        elif measure == "RD":
            single &= np.abs(e) <= 1.0
        lo = hi = e
        if both.any():
            plain_lo, lo = cols.number("lower")
            plain_hi, hi = cols.number("upper")
            both &= plain_lo & plain_hi & (lo < hi) & (lo <= e) & (e <= hi)
            if (both & ~lv_g).any() and not low < ci_level < high:
                both &= lv_g  # the review's level is not usable
            if measure in RATIO_MEASURES:
                both &= (e > 0) & (lo > 0) & (hi > 0)
            elif measure == "RD":
                both &= (np.abs(e) <= 1.0) & (np.abs(lo) <= 1.0) & (np.abs(hi) <= 1.0)
    flags = single.tolist()
    at = np.flatnonzero(both)
    if not at.size:
        return flags
    e, lo, hi = e[at], lo[at], hi[at]
    decimals = _interval_decimals(rows, at, e, lo, hi, printed)
    sure = _surely_symmetric_arrays(e, lo, hi, decimals, measure)
    for i, d, ok_i in zip(at.tolist(), zip(*(d.tolist() for d in decimals)), sure, strict=True):
        flags[i] = ok_i or _symmetric(rows[i], measure, d)
    return flags


def _interval_decimals(rows, at, e, lo, hi, printed):
    """The decimals check_row's interval rule takes for each row's estimate and limits
    (three int arrays): :func:`interval_decimals` as it reads stored values, worked out
    once per distinct value; rows with numbers as printed ask it row by row."""
    import numpy as np

    from lopside.intake.numbers import count_decimals, shown_decimals

    vals = (e.tolist(), lo.tolist(), hi.tolist())
    shown: dict = {}
    counted: dict = {}
    for v in set().union(*vals):
        s = shown_decimals(v)
        shown[v] = 99 if s is None else s  # None (exponent form): never "at most one"
        counted[v] = count_decimals(None, v)
    sh = np.array([list(map(shown.__getitem__, c)) for c in vals], dtype=int)
    co = np.array([list(map(counted.__getitem__, c)) for c in vals], dtype=int)
    top = sh.max(axis=0)
    one = top < 2  # all three show at most one decimal: read as printed so
    out = np.where(one, top, co)
    if printed is not None:
        for k, i in enumerate(at.tolist()):
            pr = (printed[i] if i < len(printed) else None) or {}
            texts = (pr.get("estimate"), pr.get("lower"), pr.get("upper"))
            if any(texts):
                r = rows[i]
                got = interval_decimals((r.estimate, r.lower, r.upper), texts)  # type: ignore[arg-type]
                out[:, k] = got
    return out[0], out[1], out[2]


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
